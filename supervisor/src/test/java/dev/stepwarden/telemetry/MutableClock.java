package dev.stepwarden.telemetry;

import java.time.Clock;
import java.time.Instant;
import java.time.ZoneId;
import java.time.ZoneOffset;

/** A clock the test moves by hand (shared by the tests of several packages). */
public final class MutableClock extends Clock {
  private volatile long millis;

  public MutableClock(long millis) {
    this.millis = millis;
  }

  public void advanceMillis(long d) {
    millis += d;
  }

  @Override
  public ZoneId getZone() {
    return ZoneOffset.UTC;
  }

  @Override
  public Clock withZone(ZoneId zone) {
    return this;
  }

  @Override
  public Instant instant() {
    return Instant.ofEpochMilli(millis);
  }

  @Override
  public long millis() {
    return millis;
  }
}
