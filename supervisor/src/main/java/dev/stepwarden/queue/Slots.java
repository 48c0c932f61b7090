package dev.stepwarden.queue;

import java.util.ArrayDeque;
import java.util.ArrayList;
import java.util.Deque;
import java.util.List;

/**
 * The slots of one serve process and the GPUs of each. Quartz's thread pool has exactly as many
 * threads as there are slots, so a job that starts always finds a free slot here.
 */
final class Slots {
  private final List<String> gpus;
  private final Deque<Integer> free = new ArrayDeque<>();

  /** @param gpus per slot the value of CUDA_VISIBLE_DEVICES, or null to leave it alone */
  Slots(List<String> gpus) {
    this.gpus = new ArrayList<>(gpus);
    for (int i = 0; i < gpus.size(); i++) {
      free.add(i);
    }
  }

  /**
   * Slots from the command line: {@code --gpus 0,1;2,3} (or the option twice) gives two slots
   * with two GPUs each. Without GPUs, {@code slots} slots that inherit CUDA_VISIBLE_DEVICES.
   */
  static List<String> plan(Integer slots, List<String> gpuOptions) throws QueueException {
    List<String> groups = new ArrayList<>();
    if (gpuOptions != null) {
      for (String o : gpuOptions) {
        for (String g : o.split(";")) {
          String t = g.strip();
          if (!t.matches("\\d+(,\\d+)*")) {
            throw new QueueException("--gpus '" + o + "': give GPU ids as numbers, commas within"
                + " a slot and ';' between slots, e.g. --gpus '0,1;2,3'");
          }
          groups.add(t);
        }
      }
    }
    if (groups.isEmpty()) {
      int n = slots == null ? 1 : slots;
      if (n < 1 || n > 256) {
        throw new QueueException("--slots " + n + ": give a number from 1 to 256");
      }
      List<String> none = new ArrayList<>();
      for (int i = 0; i < n; i++) {
        none.add(null);
      }
      return none;
    }
    if (slots != null && slots != groups.size()) {
      throw new QueueException("--slots " + slots + " but --gpus names " + groups.size()
          + " slot(s); drop --slots or give one GPU group per slot");
    }
    return groups;
  }

  int size() {
    return gpus.size();
  }

  synchronized int take() {
    Integer s = free.pollFirst();
    if (s == null) {
      throw new IllegalStateException("no free slot: the thread pool is larger than the slots");
    }
    return s;
  }

  synchronized void give(int slot) {
    free.addFirst(slot);
  }

  synchronized int free() {
    return free.size();
  }

  String gpus(int slot) {
    return gpus.get(slot);
  }
}
