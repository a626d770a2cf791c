package dev.mixd.client;

import io.grpc.CallOptions;
import io.grpc.Channel;
import io.grpc.ClientCall;
import io.grpc.ClientInterceptor;
import io.grpc.ForwardingClientCall;
import io.grpc.MethodDescriptor;
import java.util.Map;
import java.util.concurrent.ConcurrentHashMap;
import java.util.concurrent.atomic.AtomicInteger;

/** Counts the request messages the client sends, by full method name. */
final class Counting implements ClientInterceptor {
  private final Map<String, AtomicInteger> sent = new ConcurrentHashMap<>();

  @Override
  public <Q, R> ClientCall<Q, R> interceptCall(
      MethodDescriptor<Q, R> method, CallOptions options, Channel next) {
    AtomicInteger n = sent.computeIfAbsent(method.getFullMethodName(), k -> new AtomicInteger());
    return new ForwardingClientCall.SimpleForwardingClientCall<>(next.newCall(method, options)) {
      @Override
      public void sendMessage(Q message) {
        n.incrementAndGet();
        super.sendMessage(message);
      }
    };
  }

  /** Messages sent on a method so far. */
  int sent(String method) {
    return sent.getOrDefault(method, new AtomicInteger()).get();
  }
}
