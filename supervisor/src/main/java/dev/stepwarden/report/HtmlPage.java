package dev.stepwarden.report;

import static dev.stepwarden.report.RunReport.fmt;

import dev.stepwarden.report.MetricsHistory.Bucket;
import dev.stepwarden.report.MetricsHistory.Jump;
import dev.stepwarden.report.MetricsHistory.NonFinite;
import dev.stepwarden.report.MetricsHistory.RatePoint;
import dev.stepwarden.report.RunReport.Intervention;
import java.util.ArrayList;
import java.util.List;
import java.util.Locale;

/**
 * The HTML form of a {@link RunReport}: one self-contained page (no script, no external asset,
 * no network) with inline SVG charts and the table of interventions.
 *
 * <p>Colours are the colour-blind-safe set of Okabe and Ito (2008), "Color Universal Design
 * (CUD): how to make figures and presentations that are friendly to colorblind people"; lines
 * also differ in dash pattern, so a grey print stays readable. The log-scale option is a
 * checkbox that shows one of two pre-drawn loss charts through CSS alone.
 */
final class HtmlPage {
  // Okabe & Ito (2008) palette.
  static final String BLUE = "#0072B2";
  static final String VERMILLION = "#D55E00";
  static final String GREEN = "#009E73";
  static final String ORANGE = "#E69F00";
  static final String PURPLE = "#CC79A7";
  static final String SKY = "#56B4E9";
  static final String BLACK = "#000000";

  static final int WIDTH = 960;
  static final int LOSS_HEIGHT = 340;
  static final int RATE_HEIGHT = 180;
  static final int LEFT = 72;
  static final int RIGHT = 24;
  static final int TOP = 34;
  static final int BOTTOM = 40;

  private HtmlPage() {}

  static String render(RunReport r) {
    StringBuilder b = new StringBuilder(64 * 1024);
    b.append("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">\n")
        .append("<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n")
        .append("<title>").append(esc("stepwarden report: " + r.name())).append("</title>\n")
        .append("<style>").append(CSS).append("</style></head><body>\n");
    b.append("<header><h1>").append(esc(r.name())).append("</h1><p class=\"dir\">")
        .append(esc(r.dir().toString())).append("</p></header>\n");
    b.append("<section class=\"facts\"><dl>");
    fact(b, "Outcome", r.outcome().replace('-', ' ')
        + r.exitCode().map(c -> " (exit " + c + ")").orElse("") + ": " + r.reason());
    fact(b, "Use", TextReport.best(r));
    fact(b, "When", TextReport.when(r));
    int n = r.interventions().size();
    fact(b, "Rate", fmt(r.startRate()) + " at the start, " + fmt(r.finalRate()) + " at the end; "
        + n + (n == 1 ? " intervention" : " interventions"));
    fact(b, "Counts", TextReport.counts(r).substring("Counts: ".length()));
    fact(b, "Audit log", TextReport.auditState(r).substring("Audit log: ".length()));
    b.append("</dl></section>\n");

    Charts c = new Charts(r);
    boolean log = c.logByDefault();
    b.append("<section class=\"charts\">\n<h2>Loss against step</h2>\n");
    b.append("<input type=\"checkbox\" id=\"logy\" class=\"toggle\"")
        .append(log ? " checked" : "").append(c.logPossible() ? "" : " disabled")
        .append("><label for=\"logy\" class=\"toggle\">logarithmic loss axis")
        .append(c.logPossible() ? "" : " (not possible: a value is zero or below)")
        .append("</label>\n");
    b.append("<p class=\"legend\">").append(swatch(BLUE, "", "train"))
        .append(swatch(VERMILLION, "6 3", "validation"))
        .append(swatch(BLACK, "2 3", "intervention (numbered as in the table)"))
        .append(swatch(ORANGE, "", "rewind or restart: the step axis jumps back"))
        .append("</p>\n");
    b.append("<div class=\"lin\">").append(c.loss(false)).append("</div>\n");
    if (c.logPossible()) {
      b.append("<div class=\"log\">").append(c.loss(true)).append("</div>\n");
    }
    b.append("<h2>Learning rate</h2>\n<p class=\"legend\">")
        .append(swatch(GREEN, "", "learning rate in force (as decided by the guards)"))
        .append("</p>\n");
    b.append(c.rate()).append("\n</section>\n");

    b.append("<section><h2>Interventions</h2>\n");
    if (r.interventions().isEmpty()) {
      b.append("<p>No guard fired.</p>\n");
    } else {
      b.append("<table><thead><tr><th>#</th><th>step</th><th>time (UTC)</th><th>guard</th>"
          + "<th>evidence</th><th>action</th><th>rate</th><th>what became of it</th></tr>"
          + "</thead><tbody>\n");
      for (Intervention iv : r.interventions()) {
        b.append("<tr><td>").append(iv.number()).append("</td><td class=\"num\">")
            .append(iv.step()).append("</td><td>")
            .append(iv.at() == null ? "?" : TextReport.TIME.format(iv.at())).append("</td><td>")
            .append(esc(iv.guard())).append("</td><td>").append(esc(iv.evidence()))
            .append("</td><td>").append(esc(TextReport.action(iv))).append("</td><td class=\"num\">")
            .append(fmt(iv.rateBefore())).append(" &rarr; ").append(fmt(iv.rateAfter()))
            .append("</td><td>").append(esc(String.join("; ", nonEmpty(iv.result(),
                iv.confirmation(), iv.note())))).append("</td></tr>\n");
      }
      b.append("</tbody></table>\n");
    }
    b.append("</section>\n<section><h2>The night in order (UTC)</h2><ol class=\"story\">\n");
    for (TextReport.Line l : TextReport.story(r)) {
      b.append("<li><span class=\"t\">").append(l.at() == null ? "?" : TextReport.TIME.format(
          l.at())).append("</span> ").append(esc(l.text())).append("</li>\n");
    }
    b.append("</ol></section>\n");
    b.append("<footer>Written by stepwarden from ").append(esc(r.dir().toString()))
        .append(". Colours: Okabe &amp; Ito (2008), Color Universal Design. Curves are decimated"
            + " to the minimum and maximum of each bucket of about ")
        .append(c.bucketNote()).append(" samples, so every spike is still drawn.</footer>\n");
    b.append("</body></html>\n");
    return b.toString();
  }

  private static List<String> nonEmpty(String... parts) {
    List<String> out = new ArrayList<>();
    for (String p : parts) {
      if (p != null && !p.isEmpty()) {
        out.add(p);
      }
    }
    return out;
  }

  private static void fact(StringBuilder b, String k, String v) {
    b.append("<dt>").append(esc(k)).append("</dt><dd>").append(esc(v).replace("\n", "<br>"))
        .append("</dd>");
  }

  private static String swatch(String colour, String dash, String label) {
    return "<span class=\"sw\"><svg width=\"28\" height=\"10\" aria-hidden=\"true\"><line x1=\"1\""
        + " y1=\"5\" x2=\"27\" y2=\"5\" stroke=\"" + colour + "\" stroke-width=\"2.5\""
        + (dash.isEmpty() ? "" : " stroke-dasharray=\"" + dash + "\"") + "/></svg>"
        + esc(label) + "</span>";
  }

  static String esc(String s) {
    if (s == null) {
      return "";
    }
    StringBuilder b = new StringBuilder(s.length() + 16);
    for (int i = 0; i < s.length(); i++) {
      char ch = s.charAt(i);
      switch (ch) {
        case '<' -> b.append("&lt;");
        case '>' -> b.append("&gt;");
        case '&' -> b.append("&amp;");
        case '"' -> b.append("&quot;");
        default -> b.append(ch);
      }
    }
    return b.toString();
  }

  /** The drawing: scales shared by both charts so markers line up. */
  private static final class Charts {
    private final RunReport r;
    private final MetricsHistory h;
    private final double x0;
    private final double x1;
    private final double lo;
    private final double hi;

    Charts(RunReport r) {
      this.r = r;
      this.h = r.history();
      double minX = Math.min(0, h.minStep());
      double maxX = h.maxStep();
      for (Intervention iv : r.interventions()) {
        maxX = Math.max(maxX, iv.step());
      }
      x0 = minX;
      x1 = maxX <= minX ? minX + 1 : maxX;
      double l = Double.POSITIVE_INFINITY;
      double u = Double.NEGATIVE_INFINITY;
      for (String s : List.of("train", "validation")) {
        MetricsHistory.Series ser = h.series(s);
        if (ser == null) {
          continue;
        }
        for (Bucket bk : ser.buckets()) {
          l = Math.min(l, bk.min());
          u = Math.max(u, bk.max());
        }
      }
      if (l == Double.POSITIVE_INFINITY) {
        l = 0;
        u = 1;
      }
      lo = l;
      hi = u;
    }

    boolean logPossible() {
      return lo > 0;
    }

    /** Log by default when the curve spans more than a factor of 30 (a blow-up flattens it). */
    boolean logByDefault() {
      return logPossible() && hi / lo > 30;
    }

    String bucketNote() {
      MetricsHistory.Series t = h.series("train");
      if (t == null || t.buckets().isEmpty()) {
        return "1";
      }
      return Long.toString(Math.max(1, t.count / t.buckets().size()));
    }

    double x(double step) {
      return LEFT + (step - x0) / (x1 - x0) * (WIDTH - LEFT - RIGHT);
    }

    String loss(boolean log) {
      Axis y = log ? Axis.log(lo, hi, TOP, LOSS_HEIGHT - BOTTOM)
          : Axis.linear(lo, hi, TOP, LOSS_HEIGHT - BOTTOM);
      StringBuilder b = new StringBuilder();
      b.append(String.format(Locale.ROOT, "<svg class=\"chart loss %s\" xmlns=\"http://www.w3.org/"
          + "2000/svg\" viewBox=\"0 0 %d %d\" width=\"%d\" height=\"%d\" role=\"img\""
          + " aria-label=\"train and validation loss against step%s\">", log ? "log" : "lin",
          WIDTH, LOSS_HEIGHT, WIDTH, LOSS_HEIGHT, log ? ", logarithmic axis" : ""));
      b.append("<defs><marker id=\"arrow").append(log ? "L" : "N").append("\" viewBox=\"0 0 10 10\""
          + " refX=\"9\" refY=\"5\" markerWidth=\"7\" markerHeight=\"7\" orient=\"auto-start-"
          + "reverse\"><path d=\"M0,0 L10,5 L0,10 z\" fill=\"").append(ORANGE)
          .append("\"/></marker></defs>");
      frame(b, y, LOSS_HEIGHT, "loss" + (log ? " (log)" : ""));
      curve(b, "train", y, BLUE, "", false);
      curve(b, "validation", y, VERMILLION, "6 3", true);
      jumps(b, y, log ? "L" : "N");
      nonFinite(b);
      markers(b, LOSS_HEIGHT, true);
      b.append("</svg>");
      return b.toString();
    }

    String rate() {
      List<RatePoint> pts = h.rates();
      double l = Double.POSITIVE_INFINITY;
      double u = Double.NEGATIVE_INFINITY;
      for (RatePoint p : pts) {
        l = Math.min(l, p.rate());
        u = Math.max(u, p.rate());
      }
      if (pts.isEmpty()) {
        l = Double.isNaN(r.startRate()) ? 0 : r.startRate();
        u = l == 0 ? 1 : l;
      }
      boolean log = l > 0 && u / l > 1.5;
      Axis y = log ? Axis.log(l, u, TOP, RATE_HEIGHT - BOTTOM)
          : Axis.linear(l, u, TOP, RATE_HEIGHT - BOTTOM);
      StringBuilder b = new StringBuilder();
      b.append(String.format(Locale.ROOT, "<svg class=\"chart rate\" xmlns=\"http://www.w3.org/"
          + "2000/svg\" viewBox=\"0 0 %d %d\" width=\"%d\" height=\"%d\" role=\"img\""
          + " aria-label=\"learning rate against step\">", WIDTH, RATE_HEIGHT, WIDTH,
          RATE_HEIGHT));
      frame(b, y, RATE_HEIGHT, "learning rate" + (log ? " (log)" : ""));
      // Segment ends: a jump back ends the segment at its from-step; the last ends at lastStep.
      List<Long> ends = new ArrayList<>();
      for (Jump j : h.jumps()) {
        ends.add(j.fromStep());
      }
      ends.add(h.lastStep());
      int seg = -1;
      StringBuilder d = new StringBuilder();
      List<String> paths = new ArrayList<>();
      List<Integer> segs = new ArrayList<>();
      for (RatePoint p : pts) {
        if (p.segment() != seg) {
          if (d.length() > 0) {
            d.append(String.format(Locale.ROOT, " H%.1f", x(end(ends, seg))));
            paths.add(d.toString());
            segs.add(seg);
          }
          d.setLength(0);
          seg = p.segment();
          d.append(String.format(Locale.ROOT, "M%.1f,%.1f", x(p.step()), y.at(p.rate())));
        } else {
          d.append(String.format(Locale.ROOT, " H%.1f V%.1f", x(p.step()), y.at(p.rate())));
        }
      }
      if (d.length() > 0) {
        d.append(String.format(Locale.ROOT, " H%.1f", x(end(ends, seg))));
        paths.add(d.toString());
        segs.add(seg);
      }
      int lastSeg = segs.isEmpty() ? 0 : segs.get(segs.size() - 1);
      for (int i = 0; i < paths.size(); i++) {
        boolean abandoned = segs.get(i) != lastSeg;
        b.append("<path class=\"series rate\" d=\"").append(paths.get(i))
            .append("\" fill=\"none\" stroke=\"").append(GREEN).append("\" stroke-width=\"2.5\"")
            .append(abandoned ? " stroke-opacity=\"0.45\"" : "").append("/>");
      }
      markers(b, RATE_HEIGHT, false);
      b.append("</svg>");
      return b.toString();
    }

    private static long end(List<Long> ends, int seg) {
      return seg >= 0 && seg < ends.size() ? ends.get(seg) : ends.get(ends.size() - 1);
    }

    private void frame(StringBuilder b, Axis y, int height, String yLabel) {
      int bottom = height - BOTTOM;
      b.append(String.format(Locale.ROOT, "<rect x=\"%d\" y=\"%d\" width=\"%d\" height=\"%d\""
          + " fill=\"#ffffff\" stroke=\"#444\" stroke-width=\"1\"/>", LEFT, TOP,
          WIDTH - LEFT - RIGHT, bottom - TOP));
      for (double t : y.ticks()) {
        double py = y.at(t);
        b.append(String.format(Locale.ROOT, "<line x1=\"%d\" x2=\"%d\" y1=\"%.1f\" y2=\"%.1f\""
            + " stroke=\"#ddd\"/><text x=\"%d\" y=\"%.1f\" class=\"tick\" text-anchor=\"end\">"
            + "%s</text>", LEFT, WIDTH - RIGHT, py, py, LEFT - 6, py + 4, esc(fmt(t))));
      }
      for (double t : Axis.niceTicks(x0, x1, 8)) {
        double px = x(t);
        b.append(String.format(Locale.ROOT, "<line x1=\"%.1f\" x2=\"%.1f\" y1=\"%d\" y2=\"%d\""
            + " stroke=\"#444\"/><text x=\"%.1f\" y=\"%d\" class=\"tick\" text-anchor=\"middle\">"
            + "%s</text>", px, px, bottom, bottom + 5, px, bottom + 18, stepLabel(t)));
      }
      b.append(String.format(Locale.ROOT, "<text x=\"%d\" y=\"%d\" class=\"axis\""
          + " text-anchor=\"middle\">step</text>", (LEFT + WIDTH - RIGHT) / 2, height - 6));
      b.append(String.format(Locale.ROOT, "<text x=\"%d\" y=\"%d\" class=\"axis\">%s</text>",
          6, TOP - 12, esc(yLabel)));
    }

    private void curve(StringBuilder b, String name, Axis y, String colour, String dash,
        boolean dots) {
      MetricsHistory.Series s = h.series(name);
      if (s == null) {
        return;
      }
      List<Bucket> buckets = s.buckets();
      // The part of a segment beyond where a later segment restarted was abandoned: faded.
      List<Long> restarts = new ArrayList<>();
      for (Jump j : h.jumps()) {
        restarts.add(j.toStep());
      }
      int seg = -1;
      StringBuilder kept = new StringBuilder();
      StringBuilder gone = new StringBuilder();
      List<double[]> points = new ArrayList<>();
      for (Bucket bk : buckets) {
        if (bk.segment() != seg) {
          flush(b, kept, gone, colour, dash);
          seg = bk.segment();
        }
        double cut = cutFor(restarts, seg);
        if (bk.count() == 1 || bk.minStep() == bk.maxStep()) {
          point(kept, gone, cut, bk.minStep(), y.at(bk.min()), points);
          if (bk.min() != bk.max()) {
            point(kept, gone, cut, bk.maxStep(), y.at(bk.max()), points);
          }
        } else if (bk.minStep() < bk.maxStep()) {
          point(kept, gone, cut, bk.minStep(), y.at(bk.min()), points);
          point(kept, gone, cut, bk.maxStep(), y.at(bk.max()), points);
        } else {
          point(kept, gone, cut, bk.maxStep(), y.at(bk.max()), points);
          point(kept, gone, cut, bk.minStep(), y.at(bk.min()), points);
        }
      }
      flush(b, kept, gone, colour, dash);
      if (dots && points.size() <= 300) {
        for (double[] p : points) {
          b.append(String.format(Locale.ROOT, "<circle cx=\"%.1f\" cy=\"%.1f\" r=\"2.6\""
              + " fill=\"%s\"/>", p[0], p[1], colour));
        }
      }
    }

    private static double cutFor(List<Long> restarts, int seg) {
      double cut = Double.POSITIVE_INFINITY;
      for (int k = seg; k < restarts.size(); k++) {
        cut = Math.min(cut, restarts.get(k));
      }
      return cut;
    }

    private void point(StringBuilder kept, StringBuilder gone, double cut, long step, double py,
        List<double[]> points) {
      double px = x(step);
      if (step > cut) {
        if (gone.length() == 0 && kept.length() > 0) {
          gone.append(lastPoint(kept)); // join the faded part on to the kept one
        }
        gone.append(String.format(Locale.ROOT, "%.1f,%.1f ", px, py));
      } else {
        kept.append(String.format(Locale.ROOT, "%.1f,%.1f ", px, py));
      }
      points.add(new double[] {px, py});
    }

    private static String lastPoint(StringBuilder sb) {
      String s = sb.toString().trim();
      int i = s.lastIndexOf(' ');
      return (i < 0 ? s : s.substring(i + 1)) + " ";
    }

    private static void flush(StringBuilder b, StringBuilder kept, StringBuilder gone,
        String colour, String dash) {
      String d = dash.isEmpty() ? "" : " stroke-dasharray=\"" + dash + "\"";
      if (kept.length() > 0) {
        b.append("<polyline class=\"series\" points=\"").append(kept.toString().trim())
            .append("\" fill=\"none\" stroke=\"").append(colour)
            .append("\" stroke-width=\"1.8\" stroke-linejoin=\"round\"").append(d).append("/>");
      }
      if (gone.length() > 0) {
        b.append("<polyline class=\"series abandoned\" points=\"").append(gone.toString().trim())
            .append("\" fill=\"none\" stroke=\"").append(colour)
            .append("\" stroke-width=\"1.4\" stroke-opacity=\"0.35\"").append(d).append("/>");
      }
      kept.setLength(0);
      gone.setLength(0);
    }

    private void jumps(StringBuilder b, Axis y, String id) {
      MetricsHistory.Series train = h.series("train");
      List<Bucket> tb = train == null ? List.of() : train.buckets();
      int i = 0;
      for (Jump j : h.jumps()) {
        // The level where the jump happens: the last train value of the segment before it.
        double level = Double.NaN;
        int seg = i;
        for (Bucket bk : tb) {
          if (bk.segment() == seg) {
            level = (bk.min() + bk.max()) / 2;
          }
        }
        i++;
        double py = Double.isNaN(level) ? TOP + 20 : Math.max(TOP + 24, y.at(level));
        double xa = x(j.fromStep());
        double xb = x(j.toStep());
        double mid = (xa + xb) / 2;
        Intervention why = null;
        for (Intervention iv : r.interventions()) {
          if (iv.rewinds() && iv.step() <= j.fromStep()
              && (why == null || iv.step() > why.step())) {
            why = iv;
          }
        }
        String label = (why != null && why.step() >= j.toStep() ? "rewind #" + why.number()
            : "restart") + " to step " + j.toStep();
        b.append(String.format(Locale.ROOT, "<g class=\"jump\"><title>%s</title><path d=\"M%.1f,"
            + "%.1f Q%.1f,%.1f %.1f,%.1f\" fill=\"none\" stroke=\"%s\" stroke-width=\"2.2\""
            + " marker-end=\"url(#arrow%s)\"/><text x=\"%.1f\" y=\"%.1f\" class=\"lab\""
            + " text-anchor=\"middle\" fill=\"#8a5a00\">%s</text></g>", esc(label), xa, py, mid,
            py - 40, xb, py, ORANGE, id, mid, py - 24, esc(label)));
      }
    }

    private void nonFinite(StringBuilder b) {
      for (NonFinite n : h.nonFinite()) {
        double px = x(n.step());
        b.append(String.format(Locale.ROOT, "<path class=\"nonfinite\" d=\"M%.1f,%d l-5,-9 h10 z\""
            + " fill=\"%s\"><title>%s</title></path>", px, TOP, VERMILLION,
            esc(n.series() + " = " + n.value() + " at step " + n.step())));
      }
    }

    private void markers(StringBuilder b, int height, boolean labels) {
      int bottom = height - BOTTOM;
      for (Intervention iv : r.interventions()) {
        double px = x(iv.step());
        String title = "#" + iv.number() + " step " + iv.step() + ": " + iv.guard() + ": "
            + iv.evidence() + "; " + TextReport.action(iv);
        b.append(String.format(Locale.ROOT, "<g class=\"marker\" data-guard=\"%s\""
            + " data-step=\"%d\"><title>%s</title><line x1=\"%.1f\" x2=\"%.1f\" y1=\"%d\""
            + " y2=\"%d\" stroke=\"%s\" stroke-width=\"1.2\" stroke-dasharray=\"2 3\"/>",
            esc(iv.guard()), iv.step(), esc(title), px, px, TOP, bottom, BLACK));
        b.append(String.format(Locale.ROOT, "<circle cx=\"%.1f\" cy=\"%d\" r=\"8\" fill=\"%s\""
            + " stroke=\"#fff\"/><text x=\"%.1f\" y=\"%d\" class=\"num\" text-anchor=\"middle\""
            + " fill=\"#fff\">%d</text>", px, TOP - 10, BLACK, px, TOP - 6, iv.number()));
        if (labels) {
          b.append(String.format(Locale.ROOT, "<text class=\"lab\" transform=\"translate(%.1f,%d)"
              + " rotate(-90)\" text-anchor=\"end\" paint-order=\"stroke\" stroke=\"#fff\""
              + " stroke-width=\"3\">%s</text>", px - 4, TOP + 6,
              esc(iv.guard() + (iv.changesRate() ? " " + fmt(iv.rateBefore()) + "\u2192"
                  + fmt(iv.rateAfter()) : ""))));
        }
        b.append("</g>");
      }
    }

    private static String stepLabel(double t) {
      double a = Math.abs(t);
      if (a >= 1e6) {
        return fmt(t / 1e6) + "M";
      }
      if (a >= 1e4) {
        return fmt(t / 1e3) + "k";
      }
      return Long.toString(Math.round(t));
    }
  }

  /** A vertical axis: value to pixel, with tick values. */
  record Axis(double lo, double hi, double top, double bottom, boolean log, List<Double> ticks) {
    static Axis linear(double lo, double hi, double top, double bottom) {
      if (hi <= lo) {
        double pad = lo == 0 ? 1 : Math.abs(lo) * 0.1;
        lo -= pad;
        hi += pad;
      }
      double pad = (hi - lo) * 0.05;
      List<Double> t = niceTicks(lo - pad, hi + pad, 6);
      return new Axis(lo - pad, hi + pad, top, bottom, false, t);
    }

    static Axis log(double lo, double hi, double top, double bottom) {
      double a = Math.log10(lo);
      double b = Math.log10(hi);
      if (b - a < 1e-9) {
        a -= 0.1;
        b += 0.1;
      }
      double pad = (b - a) * 0.05;
      a -= pad;
      b += pad;
      List<Double> t = new ArrayList<>();
      int span = (int) Math.ceil(b - a);
      // Decades, and 2 and 5 between them when the range is short.
      for (int e = (int) Math.floor(a); e <= Math.ceil(b); e++) {
        for (double m : span <= 2 ? new double[] {1, 2, 5} : new double[] {1}) {
          double v = m * Math.pow(10, e);
          double lv = Math.log10(v);
          if (lv >= a && lv <= b) {
            t.add(v);
          }
        }
      }
      return new Axis(Math.pow(10, a), Math.pow(10, b), top, bottom, true, t);
    }

    double at(double v) {
      double f = log ? (Math.log10(v) - Math.log10(lo)) / (Math.log10(hi) - Math.log10(lo))
          : (v - lo) / (hi - lo);
      return bottom - f * (bottom - top);
    }

    /** Round tick values (1, 2 or 5 times a power of ten) covering [lo, hi]. */
    static List<Double> niceTicks(double lo, double hi, int want) {
      List<Double> out = new ArrayList<>();
      double range = hi - lo;
      if (!(range > 0)) {
        out.add(lo);
        return out;
      }
      double raw = range / want;
      double p = Math.pow(10, Math.floor(Math.log10(raw)));
      double step = raw / p < 1.5 ? p : raw / p < 3.5 ? 2 * p : raw / p < 7.5 ? 5 * p : 10 * p;
      for (double v = Math.ceil(lo / step) * step; v <= hi + step * 1e-9; v += step) {
        out.add(Math.abs(v) < step * 1e-9 ? 0 : v);
      }
      return out;
    }
  }

  static final String CSS = """
      body{font:15px/1.45 system-ui,-apple-system,"Segoe UI",Roboto,sans-serif;color:#1b1b1b;\
      background:#fafaf7;margin:0 auto;max-width:1000px;padding:18px 20px}
      h1{font-size:1.5em;margin:0}h2{font-size:1.1em;margin:22px 0 6px;border-bottom:1px solid\
       #bbb;padding-bottom:2px}
      .dir{color:#555;margin:2px 0 8px;font-family:ui-monospace,monospace;font-size:.85em}
      dl{display:grid;grid-template-columns:8em 1fr;gap:3px 12px;margin:8px 0}
      dt{font-weight:600}dd{margin:0}
      svg.chart{display:block;max-width:100%;height:auto;background:#fff}
      svg text{font:12px system-ui,sans-serif;fill:#222}svg text.num{font-weight:700;font-size:11px;\
      fill:#fff}svg text.lab{font-size:11px}svg text.axis{font-weight:600}
      .legend{margin:4px 0;font-size:.9em}.sw{margin-right:16px;white-space:nowrap}\
      .sw svg{vertical-align:middle;margin-right:4px}
      input.toggle{margin:0 6px 0 0}label.toggle{font-size:.9em}
      .log{display:none}#logy:checked~.lin{display:none}#logy:checked~.log{display:block}
      table{border-collapse:collapse;width:100%;font-size:.88em;background:#fff}
      th,td{border:1px solid #bbb;padding:4px 6px;vertical-align:top;text-align:left}
      th{background:#ecece6}td.num{text-align:right;white-space:nowrap}
      ol.story{padding-left:1.2em;font-size:.9em}ol.story .t{font-family:ui-monospace,monospace;\
      color:#444}
      footer{margin-top:22px;color:#555;font-size:.8em}
      @media print{body{background:#fff;max-width:none;font-size:10pt}label.toggle,input.toggle{\
      display:none}section{break-inside:avoid-page}tr{break-inside:avoid}\
      svg.chart{width:100%}}
      """;
}
