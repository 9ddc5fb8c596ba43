"""Timing of the science core: a 10-replicate preview with 10^5 and 10^6 Monte Carlo draws.

    python -m stockroom.benchmark

measures the median wall time of the pure computation (request parsing, chemistry, statistics,
GUM and Monte Carlo) and of the same request through the Flask test client, and compares each with
the goals of the science-core issue: 10^5 draws within 30 ms, 10^6 draws within 0.5 s. A later
`stockroom bench` command calls science_figures(). This is a benchmark, not a test: the figures
depend on the machine.
"""

from __future__ import annotations

import statistics
import tempfile
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

GOALS_S = {100_000: 0.030, 1_000_000: 0.5}


def sample_request(draws: int) -> dict[str, Any]:
    """A 10-replicate NaOH-against-KHP preview request (invented numbers), with `draws` Monte Carlo trials."""
    masses = (0.8123, 0.8241, 0.8090, 0.8302, 0.8177, 0.8212, 0.8150, 0.8266, 0.8105, 0.8230)
    titres = (39.80, 40.39, 39.62, 40.70, 40.04, 40.22, 39.93, 40.49, 39.71, 40.33)
    return {
        "titrant": "NaOH", "standard": "KHP", "purity": 0.99995, "purity_U": 0.0002, "purity_k": 2,
        "nominal_molarity": 0.1, "monte_carlo_draws": draws,
        "replicates": [{"gross_g": round(15.0 + m, 4), "tare_g": 15.0, "volume_ml": v, "blank_ml": 0.03,
                        "temperature_c": 21.0} for m, v in zip(masses, titres, strict=True)],
    }


def _median_seconds(func: Callable[[], Any], repeats: int) -> float:
    func()  # warm caches (imports, molar masses, the t quantiles) before timing
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        func()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def science_figures(repeats_1e5: int = 25, repeats_1e6: int = 7) -> dict[str, Any]:
    """Median times of the preview computation, pure and through Flask, against the issue's goals.

    repeats_1e5, repeats_1e6: timed runs per case (counts). Returns a dict with, per draw count,
    pure_ms and client_ms (milliseconds), goal_ms, the ratios time/goal (below 1 meets the goal)
    and client_over_pure (the cost of the HTTP layer), plus met (all ratios below 1).
    """
    from stockroom import create_app
    from stockroom.web.preview import URL_RULE, compute_preview

    out: dict[str, Any] = {"cases": []}
    with tempfile.TemporaryDirectory() as tmp:
        app = create_app({"DATABASE": str(Path(tmp) / "bench.db"), "TESTING": True})
        client = app.test_client()
        for draws, repeats in ((100_000, repeats_1e5), (1_000_000, repeats_1e6)):
            body = sample_request(draws)
            def pure_computation(b: dict[str, Any] = body) -> None:
                compute_preview(b, app.config)

            with app.app_context():
                pure = _median_seconds(pure_computation, repeats)

            def through_client(b: dict[str, Any] = body) -> None:
                r = client.post(URL_RULE, json=b)
                if r.status_code != 200:
                    raise RuntimeError(f"preview answered {r.status_code}: {r.get_data(as_text=True)[:300]}")

            via = _median_seconds(through_client, repeats)
            goal = GOALS_S[draws]
            out["cases"].append({
                "draws": draws, "replicates": len(body["replicates"]), "repeats": repeats,
                "pure_ms": pure * 1000, "client_ms": via * 1000, "goal_ms": goal * 1000,
                "pure_over_goal": pure / goal, "client_over_goal": via / goal, "client_over_pure": via / pure,
            })
    cases = out["cases"]
    out["met"] = all(c["client_over_goal"] < 1 and c["pure_over_goal"] < 1 for c in cases)
    out["ratio_1e6_over_1e5"] = cases[1]["pure_ms"] / cases[0]["pure_ms"]
    return out


def main() -> None:
    """Print the figures as a small table."""
    figures = science_figures()
    print("preview of a 10-replicate run (median wall time)")
    print(f"{'draws':>9}  {'pure ms':>9}  {'Flask ms':>9}  {'goal ms':>8}  {'pure/goal':>9}  "
          f"{'Flask/goal':>10}  {'Flask/pure':>10}")
    for c in figures["cases"]:
        print(f"{c['draws']:>9}  {c['pure_ms']:>9.2f}  {c['client_ms']:>9.2f}  {c['goal_ms']:>8.0f}  "
              f"{c['pure_over_goal']:>9.3f}  {c['client_over_goal']:>10.3f}  {c['client_over_pure']:>10.3f}")
    print(f"10^6 / 10^5 draws (pure): {figures['ratio_1e6_over_1e5']:.1f}x")
    print("goals met" if figures["met"] else "GOALS NOT MET")


if __name__ == "__main__":
    main()
