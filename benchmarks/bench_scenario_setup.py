"""Setting up a dimming scenario: table, instrument responses and the flare-loop run."""
import time

from common import dimming_scenario


def run(quick):
    dimming_scenario.cache_clear()  # a fresh scenario, also in --smoke where other rows share the process
    t0, c0 = time.perf_counter(), time.process_time()
    scenario = dimming_scenario()
    return {"seconds": time.perf_counter() - t0, "cpu": time.process_time() - c0,
            "note": f"{scenario.n_bins} bins x {len(scenario.labels)} bands; first set-up in the process "
                    "(table load included)"}


BENCHMARKS = [dict(
    name="scenario_setup", unit="s", target=None, run=run,
    about="DimmingScenario(...) of the invented K dwarf used by the dimming rows (2 pc, two-component corona, "
          "1e18 g CME, 1e33 erg flare, 3 bands, 1000 bins of 60 s): table, responses and the flare-loop run",
    source="no target: a figure to watch")]
