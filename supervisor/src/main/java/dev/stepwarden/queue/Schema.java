package dev.stepwarden.queue;

import java.io.IOException;
import java.io.InputStream;
import java.nio.charset.StandardCharsets;
import java.sql.Connection;
import java.sql.DriverManager;
import java.sql.SQLException;
import java.sql.Statement;
import java.util.Properties;

/** Creates the Quartz tables when they are missing (both scripts are idempotent). */
final class Schema {
  private Schema() {}

  static void apply(QueueSettings s) throws QueueException {
    String name = s.postgres() ? "schema-postgres.sql" : "schema-h2.sql";
    String script;
    try (InputStream in = Schema.class.getResourceAsStream(name)) {
      if (in == null) {
        throw new QueueException("the queue schema " + name + " is missing from the jar");
      }
      script = new String(in.readAllBytes(), StandardCharsets.UTF_8);
    } catch (IOException e) {
      throw new QueueException("cannot read the queue schema " + name + ": " + e.getMessage(), e);
    }
    script = script.replace("{prefix}", s.tablePrefix());
    Properties p = new Properties();
    p.setProperty("user", s.user() == null ? (s.postgres() ? "postgres" : "sa") : s.user());
    p.setProperty("password", s.password() == null ? "" : s.password());
    try (Connection c = DriverManager.getConnection(s.url(), p);
        Statement st = c.createStatement()) {
      for (String sql : script.split(";")) {
        String body = sql.replaceAll("(?m)^--.*$", "").strip();
        if (!body.isEmpty()) {
          st.execute(body);
        }
      }
    } catch (SQLException e) {
      throw new QueueException("cannot prepare the queue database " + redact(s.url()) + ": "
          + e.getMessage() + (s.postgres() ? " (is PostgreSQL running and reachable?)"
          : " (is another program holding " + s.home().resolve("queue.mv.db") + "?)"), e);
    }
  }

  static String redact(String url) {
    return url.replaceAll("password=[^&;]*", "password=***");
  }
}
