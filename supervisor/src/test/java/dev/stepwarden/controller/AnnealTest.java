package dev.stepwarden.controller;

import static org.junit.jupiter.api.Assertions.assertEquals;
import static org.junit.jupiter.api.Assertions.assertThrows;

import org.junit.jupiter.api.Test;

class AnnealTest {
  @Test
  void followsTheHalfCosineOfSgdrOverTheLastQuarter() {
    // Loshchilov and Hutter 2017, eq. 5: eta = eta_min + (eta_max - eta_min)(1 + cos(pi T/T_i))/2
    Anneal a = new Anneal(1000, 0.25, 0.01);
    assertEquals(750, a.start());
    assertEquals(0.4, a.rateAt(100, 0.4), 0.0);
    assertEquals(0.4, a.rateAt(750, 0.4), 0.0);
    assertEquals(0.004 + 0.5 * 0.396 * (1 + Math.cos(Math.PI / 2)), a.rateAt(875, 0.4), 1e-12);
    assertEquals(0.202, a.rateAt(875, 0.4), 1e-12); // halfway: the mean of the two ends
    assertEquals(0.004, a.rateAt(1000, 0.4), 1e-12);
    assertEquals(0.004, a.rateAt(5000, 0.4), 1e-12); // past the plan: stays at the end rate
  }

  @Test
  void refusesAnEmptyPlanWithTheValuesInTheMessage() {
    IllegalArgumentException e = assertThrows(IllegalArgumentException.class,
        () -> new Anneal(0, 0.25, 0.01));
    assertEquals(true, e.getMessage().contains("planned steps > 0"));
  }
}
