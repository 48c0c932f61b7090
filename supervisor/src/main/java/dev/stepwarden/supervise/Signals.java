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
      handle.invoke(null, sig, h);
      return true;
    } catch (ClassNotFoundException | NoSuchMethodException | InstantiationException
        | IllegalAccessException e) {
      return false;
    } catch (InvocationTargetException e) {
      return false; // IllegalArgumentException: unknown signal, or one the JVM uses itself
    }
  }
}
