package dev.stepwarden.report;

import static org.assertj.core.api.Assertions.assertThat;
import static org.junit.jupiter.api.Assumptions.assumeTrue;

import java.awt.image.BufferedImage;
import java.io.File;
import java.io.IOException;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.ArrayList;
import java.util.List;
import java.util.Optional;
import java.util.concurrent.TimeUnit;
import java.util.regex.Matcher;
import java.util.regex.Pattern;
import javax.imageio.ImageIO;
import org.junit.jupiter.api.Test;

/**
 * Renders the demo night's page in a real browser: Debian's headless {@code chromium}. Skips,
 * saying why, when it is not installed. The PNG and the page are kept under
 * {@code target/report-artifacts/} for a person to look at.
 */
class ChromiumRenderTest {
  private static final Path ARTIFACTS = Path.of("target", "report-artifacts").toAbsolutePath();

  @Test
  void demoPageRendersInHeadlessChromiumWithTwoChartsAnInterventionMarkerAndVisibleCurves()
      throws Exception {
    Optional<Path> chromium = findChromium();
    assumeTrue(chromium.isPresent(), "chromium is not installed (apt-get install -y chromium,"
        + " or point -Dstepwarden.chromium at it): skipping the real-browser check of the HTML"
        + " report");
    Files.createDirectories(ARTIFACTS);
    Path html = ARTIFACTS.resolve("demo-report.html");
    Files.writeString(html, RunReport.load(DemoRun.dir()).html(), StandardCharsets.UTF_8);
    Path png = ARTIFACTS.resolve("demo-report.png");
    Files.deleteIfExists(png);

    Run shot = chromium(chromium.get(), "--screenshot=" + png, "--window-size=1100,1500",
        html.toUri().toString());
    assertThat(Files.isRegularFile(png)).as("chromium wrote no screenshot; it said:%n%s",
        shot.output).isTrue();
    BufferedImage img = ImageIO.read(png.toFile());
    assertThat(img).as("the PNG must decode").isNotNull();
    assertThat(img.getWidth()).isEqualTo(1100);

    // Not blank: the luminance varies, and the train and validation colours (Okabe & Ito 2008)
    // are actually on screen, so the curves were drawn rather than only the page frame.
    double variance = luminanceVariance(img);
    int blue = countNear(img, 0x0072B2);
    int vermillion = countNear(img, 0xD55E00);
    int green = countNear(img, 0x009E73);
    System.out.printf("chromium screenshot %s: %dx%d, luminance variance %.1f, pixels of"
        + " train %d, validation %d, rate %d%n", png, img.getWidth(), img.getHeight(), variance,
        blue, vermillion, green);
    assertThat(variance).as("a blank page has variance ~0").isGreaterThan(100);
    assertThat(blue).as("train curve pixels").isGreaterThan(500);
    assertThat(vermillion).as("validation curve pixels").isGreaterThan(100);
    assertThat(green).as("learning-rate line pixels").isGreaterThan(300);

    // The DOM as the browser parsed it.
    Run dom = chromium(chromium.get(), "--dump-dom", html.toUri().toString());
    Files.writeString(ARTIFACTS.resolve("demo-report.dom.html"), dom.output);
    assertThat(count(dom.output, "<svg class=\"chart ")).isGreaterThanOrEqualTo(2);
    assertThat(count(dom.output, "<g class=\"marker\"")).isGreaterThanOrEqualTo(1);
    assertThat(dom.output).contains("</table>");
  }

  /** The browser: {@code -Dstepwarden.chromium=PATH} if given, else chromium on the PATH. */
  static Optional<Path> findChromium() {
    String given = System.getProperty("stepwarden.chromium");
    if (given != null && !given.isBlank()) {
      Path p = Path.of(given);
      return Files.isExecutable(p) ? Optional.of(p) : Optional.empty();
    }
    String path = System.getenv().getOrDefault("PATH", "/usr/bin:/bin");
    for (String dir : path.split(File.pathSeparator)) {
      for (String name : List.of("chromium", "chromium-browser")) {
        Path p = Path.of(dir, name);
        if (Files.isExecutable(p)) {
          return Optional.of(p);
        }
      }
    }
    return Optional.empty();
  }

  record Run(int exit, String output) {}

  private static Run chromium(Path exe, String... args) throws IOException, InterruptedException {
    Path profile = Files.createTempDirectory("stepwarden-chromium-");
    List<String> cmd = new ArrayList<>(List.of(exe.toString(), "--headless", "--no-sandbox",
        "--disable-gpu", "--disable-quic", "--no-first-run", "--disable-background-networking",
        "--disable-component-update", "--disable-sync", "--hide-scrollbars",
        "--user-data-dir=" + profile));
    cmd.addAll(List.of(args));
    Path out = Files.createTempFile("stepwarden-chromium-", ".out");
    Process p = new ProcessBuilder(cmd).redirectErrorStream(false)
        .redirectOutput(out.toFile()).redirectError(ProcessBuilder.Redirect.DISCARD).start();
    try {
      if (!p.waitFor(90, TimeUnit.SECONDS)) {
        p.descendants().forEach(ProcessHandle::destroyForcibly);
        p.destroyForcibly();
        throw new AssertionError("chromium did not finish within 90 s: " + cmd);
      }
      return new Run(p.exitValue(), Files.readString(out));
    } finally {
      Files.deleteIfExists(out);
      deleteTree(profile);
    }
  }

  private static void deleteTree(Path dir) throws IOException {
    try (var s = Files.walk(dir)) {
      for (Path q : s.sorted((a, b) -> b.getNameCount() - a.getNameCount()).toList()) {
        Files.deleteIfExists(q);
      }
    } catch (IOException e) {
      // a leftover temp profile is harmless
    }
  }

  static double luminanceVariance(BufferedImage img) {
    double sum = 0;
    double sq = 0;
    long n = 0;
    for (int y = 0; y < img.getHeight(); y += 2) {
      for (int x = 0; x < img.getWidth(); x += 2) {
        int rgb = img.getRGB(x, y);
        double l = 0.2126 * ((rgb >> 16) & 255) + 0.7152 * ((rgb >> 8) & 255)
            + 0.0722 * (rgb & 255);
        sum += l;
        sq += l * l;
        n++;
      }
    }
    double mean = sum / n;
    return sq / n - mean * mean;
  }

  static int countNear(BufferedImage img, int target) {
    int tr = (target >> 16) & 255;
    int tg = (target >> 8) & 255;
    int tb = target & 255;
    int c = 0;
    for (int y = 0; y < img.getHeight(); y++) {
      for (int x = 0; x < img.getWidth(); x++) {
        int rgb = img.getRGB(x, y);
        int dr = ((rgb >> 16) & 255) - tr;
        int dg = ((rgb >> 8) & 255) - tg;
        int db = (rgb & 255) - tb;
        if (dr * dr + dg * dg + db * db < 30 * 30) {
          c++;
        }
      }
    }
    return c;
  }

  private static int count(String s, String what) {
    Matcher m = Pattern.compile(Pattern.quote(what)).matcher(s);
    int n = 0;
    while (m.find()) {
      n++;
    }
    return n;
  }
}
