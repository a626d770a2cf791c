package dev.mixd.client;

import org.junit.jupiter.api.extension.ExtensionContext;
import org.junit.jupiter.api.extension.ParameterContext;
import org.junit.jupiter.api.extension.ParameterResolver;

/**
 * JUnit extension giving test classes one TCP daemon for the whole run: started on first use,
 * stopped when the run ends (the root store closes it).
 */
final class SharedDaemon implements ParameterResolver {
  private static final ExtensionContext.Namespace NS =
      ExtensionContext.Namespace.create(SharedDaemon.class);

  /** Closes the daemon when JUnit closes the root store. */
  private static final class Holder implements AutoCloseable {
    final Daemon daemon;

    Holder(Daemon daemon) {
      this.daemon = daemon;
    }

    @Override
    public void close() throws InterruptedException {
      daemon.close();
    }
  }

  @Override
  public boolean supportsParameter(ParameterContext pc, ExtensionContext ec) {
    return pc.getParameter().getType() == Daemon.class;
  }

  @Override
  public Object resolveParameter(ParameterContext pc, ExtensionContext ec) {
    Holder h =
        ec.getRoot()
            .getStore(NS)
            .getOrComputeIfAbsent(
                "daemon",
                k -> {
                  try {
                    return new Holder(Daemon.startTcp());
                  } catch (Exception e) {
                    throw new IllegalStateException("starting mixd: " + e, e);
                  }
                },
                Holder.class);
    return h.daemon;
  }
}
