// /healthz probed one request at a time, 10 ms apart, while a test's heavy request runs. A probe
// counts from when it was due (10 ms after the previous answer), so a blocked event loop shows even
// when it blocks between probes; the event loop's own longest delay and the process's peak RSS
// are reported too. Shared by the fault tests of the request door.
import { monitorEventLoopDelay } from 'node:perf_hooks';

export interface Health {
  maxMs: number;
  probes: number;
  /** The event loop's longest delay meanwhile (perf_hooks), in ms. */
  loopMaxMs: number;
  /** The process's peak RSS (its high-water mark), in MiB. */
  peakRssMb: number;
}

export function watchHealth(getHealthz: () => Promise<{ status: number }>): { stop: () => Promise<Health> } {
  const loopDelay = monitorEventLoopDelay({ resolution: 5 });
  loopDelay.enable();
  let running = true;
  let maxMs = 0;
  let probes = 0;
  const loop = (async () => {
    let due = performance.now();
    while (running) {
      const a = await getHealthz();
      if (a.status !== 200) throw new Error(`/healthz answered ${a.status}`);
      const now = performance.now();
      maxMs = Math.max(maxMs, now - due);
      probes++;
      await new Promise((r) => setTimeout(r, 10));
      due = now + 10;
    }
  })();
  return {
    stop: async () => {
      running = false;
      await loop;
      loopDelay.disable();
      return { maxMs, probes, loopMaxMs: loopDelay.max / 1e6, peakRssMb: process.resourceUsage().maxRSS / 1024 };
    },
  };
}
