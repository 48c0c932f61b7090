package dev.stepwarden.demo;

import java.io.BufferedReader;
import java.io.IOException;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.util.ArrayList;
import java.util.Arrays;
import java.util.List;
import java.util.TreeSet;

/**
 * Reads a plain comma-separated table: a header row, then numeric feature columns and a last
 * column holding an integer class label. Quoted fields are not supported (open benchmark tables in
 * this shape rarely need them). The distinct labels, sorted numerically, become classes
 * {@code 0..C-1}, so labels {@code 1,2,3} or {@code 0,5} work as well as {@code 0,1,2}.
 */
final class CsvData {
  private CsvData() {}

  /** Bad content in the file; the message names the line and what to fix. */
  static final class FormatException extends Exception {
    FormatException(String message) {
      super(message);
    }
  }

  static Dataset read(Path file) throws IOException, FormatException {
    List<double[]> rows = new ArrayList<>();
    List<Long> labels = new ArrayList<>();
    List<String> header;
    try (BufferedReader in = Files.newBufferedReader(file, StandardCharsets.UTF_8)) {
      String line = in.readLine();
      int lineNo = 1;
      while (line != null && line.isBlank()) {
        line = in.readLine();
        lineNo++;
      }
      if (line == null) {
        throw new FormatException(file + ": the file is empty; expected a header row and data rows");
      }
      header = Arrays.stream(stripBom(line).split(",", -1)).map(String::strip).toList();
      if (header.size() < 2) {
        throw new FormatException(
            file + ":" + lineNo + ": the header has " + header.size()
                + " column; need at least one feature column and a last label column,"
                + " separated by commas");
      }
      int columns = header.size();
      while ((line = in.readLine()) != null) {
        lineNo++;
        if (line.isBlank()) {
          continue;
        }
        String[] cells = line.split(",", -1);
        if (cells.length != columns) {
          throw new FormatException(
              file + ":" + lineNo + ": " + cells.length + " columns, but the header has " + columns);
        }
        double[] features = new double[columns - 1];
        for (int c = 0; c < columns - 1; c++) {
          features[c] = number(file, lineNo, header.get(c), cells[c]);
        }
        labels.add(label(file, lineNo, header.get(columns - 1), cells[columns - 1]));
        rows.add(features);
      }
    }
    if (rows.size() < 2) {
      throw new FormatException(file + ": " + rows.size() + " data rows; need at least 2 to split");
    }
    List<Long> distinct = new ArrayList<>(new TreeSet<>(labels));
    if (distinct.size() < 2) {
      throw new FormatException(
          file + ": every row has label " + distinct.get(0) + "; need at least two classes");
    }
    int features = header.size() - 1;
    double[] x = new double[rows.size() * features];
    int[] y = new int[rows.size()];
    for (int r = 0; r < rows.size(); r++) {
      System.arraycopy(rows.get(r), 0, x, r * features, features);
      y[r] = distinct.indexOf(labels.get(r));
    }
    List<String> classNames = distinct.stream().map(String::valueOf).toList();
    return new Dataset(x, y, header.subList(0, features), classNames);
  }

  private static String stripBom(String line) {
    return line.startsWith("\uFEFF") ? line.substring(1) : line;
  }

  private static double number(Path file, int lineNo, String column, String cell)
      throws FormatException {
    String s = cell.strip();
    try {
      double v = Double.parseDouble(s);
      if (Double.isFinite(v)) {
        return v;
      }
    } catch (NumberFormatException e) {
      // fall through to the message below
    }
    throw new FormatException(
        file + ":" + lineNo + ": column '" + column + "' holds '" + s
            + "'; feature columns must be finite numbers (fill or drop missing values first)");
  }

  private static long label(Path file, int lineNo, String column, String cell)
      throws FormatException {
    String s = cell.strip();
    try {
      return Long.parseLong(s);
    } catch (NumberFormatException e) {
      throw new FormatException(
          file + ":" + lineNo + ": label column '" + column + "' holds '" + s
              + "'; the last column must be an integer class label");
    }
  }
}
