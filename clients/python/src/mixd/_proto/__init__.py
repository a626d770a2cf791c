"""Generated gRPC stubs of the mixd public API (proto/mixd/v1).

Made by clients/python/scripts/generate.sh; do not edit by hand.
"""
