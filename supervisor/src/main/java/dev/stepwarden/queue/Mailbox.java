package dev.stepwarden.queue;

import java.io.IOException;
import java.nio.charset.StandardCharsets;
import java.nio.file.DirectoryStream;
import java.nio.file.Files;
import java.nio.file.Path;
import java.nio.file.StandardCopyOption;
import java.time.Duration;
import java.util.Map;
import java.util.UUID;
import java.util.function.Function;
import tools.jackson.databind.JsonNode;
import tools.jackson.databind.json.JsonMapper;

/**
 * How a {@code queue} command reaches the serve that holds the embedded store: a request file in
 * {@code HOME/requests} (0700), answered by a reply file that serve writes next to it. Both are
 * written whole and renamed into place, so neither side reads half a file. No socket: the
 * folder's permissions are the access control, the same as for the database file.
 */
final class Mailbox {
  static final String FOLDER = "requests";
  private static final JsonMapper JSON = JsonMapper.builder().build();
  private static final String REQUEST = ".request.json";
  private static final String REPLY = ".reply.json";

  private Mailbox() {}

  /**
   * Sends {@code request} and waits for the reply.
   *
   * @throws QueueException when serve does not answer within {@code patience}
   */
  static JsonNode call(Path home, Map<String, ?> request, Home.Holder serve, Duration patience)
      throws QueueException {
    Path dir = home.resolve(FOLDER);
    String id = UUID.randomUUID().toString();
    Path reply = dir.resolve(id + REPLY);
    try {
      Home.privateDirectories(dir);
      writeWhole(dir.resolve(id + REQUEST), JSON.writeValueAsString(request));
      long end = System.nanoTime() + patience.toNanos();
      while (!Files.exists(reply)) {
        if (System.nanoTime() > end) {
          Files.deleteIfExists(dir.resolve(id + REQUEST));
          throw new QueueException(serve.describe() + " holds the queue in " + home
              + " but did not answer within " + patience.toSeconds() + " s; is it stopped"
              + " (SIGSTOP) or overloaded? Try again, or stop it first");
        }
        Thread.sleep(20);
      }
      JsonNode n = JSON.readTree(Files.readString(reply, StandardCharsets.UTF_8));
      Files.deleteIfExists(reply);
      if (n.has("error")) {
        throw new QueueException(n.get("error").asString());
      }
      return n;
    } catch (IOException e) {
      throw new QueueException("cannot reach the serve of " + home + " through " + dir + ": "
          + e.getMessage(), e);
    } catch (InterruptedException e) {
      Thread.currentThread().interrupt();
      throw new QueueException("interrupted while waiting for serve's answer", e);
    }
  }

  /** Answers every waiting request (serve's tick); a handler's exception becomes the reply. */
  static void answer(Path home, Function<JsonNode, Map<String, ?>> handler) throws IOException {
    Path dir = home.resolve(FOLDER);
    if (!Files.isDirectory(dir)) {
      return;
    }
    try (DirectoryStream<Path> ds = Files.newDirectoryStream(dir, "*" + REQUEST)) {
      for (Path req : ds) {
        String name = req.getFileName().toString();
        String id = name.substring(0, name.length() - REQUEST.length());
        Object reply;
        try {
          reply = handler.apply(JSON.readTree(Files.readString(req, StandardCharsets.UTF_8)));
        } catch (RuntimeException e) {
          reply = Map.of("error", e.getCause() instanceof QueueException q ? q.getMessage()
              : String.valueOf(e.getMessage()));
        }
        writeWhole(dir.resolve(id + REPLY), JSON.writeValueAsString(reply));
        Files.deleteIfExists(req);
      }
    }
  }

  private static void writeWhole(Path target, String text) throws IOException {
    Path tmp = Home.privateFile(target.resolveSibling(target.getFileName() + ".tmp"));
    Files.writeString(tmp, text, StandardCharsets.UTF_8);
    Files.move(tmp, target, StandardCopyOption.ATOMIC_MOVE, StandardCopyOption.REPLACE_EXISTING);
  }
}
