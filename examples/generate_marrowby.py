"""Generate the invented Marrowby Valley demo scenario into a folder.

Usage: python examples/generate_marrowby.py OUTDIR [--seed N] [--addresses N]

Everything in the scenario is invented (places, people, answers).
"""

from __future__ import annotations

import argparse

from skipwise.demo.scenario import generate


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description="Write the invented Marrowby Valley demo scenario.")
    parser.add_argument("outdir", help="folder to write the files into (created if needed)")
    parser.add_argument("--seed", type=int, default=2026, help="random seed (default 2026)")
    parser.add_argument("--addresses", type=int, default=5000, help="sampled addresses (default 5000)")
    args = parser.parse_args(argv)
    scenario = generate(seed=args.seed, n_addresses=args.addresses)
    paths = scenario.write(args.outdir)
    print(f"{len(scenario.sample)} addresses sampled, {len(scenario.interviews)} interviews")
    for name, path in paths.items():
        print(f"  {name:18s} {path}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
