"""How much worse may inter-chip links be? Per-round logical error of a surface-code patch across a seam.

See codebench/forecast/links.py for the device and the comparison with Ramette, Sinclair,
Breuckmann, Vuletic, npj Quantum Information 10, 58 (2024).

Usage::

    python scripts/link_tolerance.py [--p 0.002] [--distances 3,5] [--ratios 1,2,5,10,14,20] [--shots 200000]

Prints one row per (d, ratio) and, per ratio, Lambda = eps_d / eps_{d+2} between consecutive distances.
"""

from __future__ import annotations

import argparse

from codebench.forecast.links import link_tolerance


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--p", type=float, default=0.002, help="bulk error p (default: 0.002)")
    parser.add_argument("--distances", default="3,5")
    parser.add_argument("--ratios", default="1,2,5,10,14,20")
    parser.add_argument("--shots", type=int, default=200_000)
    parser.add_argument("--seed", type=int, default=1)
    args = parser.parse_args()
    distances = [int(x) for x in args.distances.split(",")]
    ratios = [float(x) for x in args.ratios.split(",")]
    rows = link_tolerance(distances, ratios, args.p, args.shots, args.seed, progress=True)
    print(f"bulk p = {args.p:g}; link error = ratio x bulk on the seam's couplers")
    print("| d | ratio | links used | shots | failures | per round | 95% interval | vs ratio 1 |")
    print("|---|---|---|---|---|---|---|---|")
    base = {r.distance: r.per_round for r in rows if r.ratio == ratios[0]}
    for r in rows:
        print(f"| {r.distance} | {r.ratio:g} | {r.links_used} | {r.shots:,} | {r.failures:,} | {r.per_round:.3e} | "
              f"[{r.low:.2e}, {r.high:.2e}] | {r.per_round / base[r.distance]:.2f} |")
    for ratio in ratios:
        rates = {r.distance: r.per_round for r in rows if r.ratio == ratio}
        steps = [f"Lambda_{a}/{b} = {rates[a] / rates[b]:.2f}" for a, b in zip(distances, distances[1:])
                 if rates.get(b)]
        print(f"ratio {ratio:g}: " + ", ".join(steps))


if __name__ == "__main__":
    main()
