#!/usr/bin/env bash
# Builds and tests the Java client (clients/java) with Maven: generates the
# gRPC/protobuf classes from proto/, compiles with Javadoc checks, and runs the
# JUnit suite against a real daemon that the tests build with `go build` and
# start on 127.0.0.1 port 0 (and a Unix socket). Needs Java 17+, Maven 3.8+
# and Go; Maven downloads only from Maven Central.
#
# Not quiet (-q would hide Surefire's "Tests run:" summary, which CI reads);
# --no-transfer-progress keeps the download log short.
set -euo pipefail
cd "$(dirname "$0")/../../clients/java"

java -version 2>&1
mvn -B -v

mvn -B --no-transfer-progress -Dstyle.color=never verify
