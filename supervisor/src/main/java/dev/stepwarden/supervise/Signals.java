package dev.stepwarden.supervise;

import java.lang.reflect.Constructor;
import java.lang.reflect.InvocationTargetException;
import java.lang.reflect.Method;
import java.lang.reflect.Proxy;

/**
 * Installs a handler for a POSIX signal such as {@code USR1} (a batch scheduler's pre-emption
 * notice). The JDK's only way is {@code sun.misc.Signal} in the {@code jdk.unsupported} module.
 * It is reached by reflection: javac warns about any direct use of that package and the build
 * fails on warnings, and a JVM without the module should still run, just without the handler.
 */
public final class Signals {
  private Signals() {}

  /**
   * Runs {@code action} (on a JVM signal thread; keep it quick) whenever {@code name} arrives.
   *
   * @param name the signal without {@code SIG}, e.g. {@code USR1}
   * @return false when the signal cannot be handled here (unknown, reserved by the JVM, or no
   *     {@code jdk.unsupported})
   */
  public static boolean install(String name, Runnable action) {
    return replace(name, action) != null;
  }

  /**
   * As {@link #install}, and gives back what puts the previous handler back (for a command run
   * in-process, such as a test, that must not leave {@code TERM} or {@code INT} taken over).
   *
   * @return the restorer, or null when the signal cannot be handled here
   */
  public static Runnable replace(String name, Runnable action) {
    try {
      Class<?> signal = Class.forName("sun.misc.Signal");
      Class<?> handler = Class.forName("sun.misc.SignalHandler");
      Constructor<?> make = signal.getConstructor(String.class);
      Object sig = make.newInstance(name);
      Object h = Proxy.newProxyInstance(handler.getClassLoader(), new Class<?>[] {handler},
          (proxy, method, args) -> {
            if (method.getName().equals("handle")) {
              action.run();
              return null;
            }
            return switch (method.getName()) {
              case "hashCode" -> System.identityHashCode(proxy);
              case "equals" -> proxy == args[0];
              default -> "stepwarden signal handler for " + name;
            };
          });
      Method handle = signal.getMethod("handle", signal, handler);
      Object previous = handle.invoke(null, sig, h);
      return () -> {
        try {
          handle.invoke(null, sig, previous);
        } catch (IllegalAccessException | InvocationTargetException e) {
          // the JVM is going down or refuses: nothing left to restore for
        }
      };
    } catch (ClassNotFoundException | NoSuchMethodException | InstantiationException
        | IllegalAccessException e) {
      return null;
    } catch (InvocationTargetException e) {
      return null; // IllegalArgumentException: unknown signal, or one the JVM uses itself
    }
  }
}
