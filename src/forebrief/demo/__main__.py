"""``python -m forebrief.demo [OUT_DIR] [--seed N]``: (re)generate the invented example inputs."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from forebrief.demo.files import regenerate_example_inputs
from forebrief.demo.scenario import DEFAULT_SEED


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(
        prog="python -m forebrief.demo",
        description="Write the invented demo scenario (observations, submissions, scenario.json).",
    )
    parser.add_argument("out_dir", nargs="?", default="example_inputs", type=Path)
    parser.add_argument("--seed", type=int, default=DEFAULT_SEED)
    args = parser.parse_args(argv)
    written = regenerate_example_inputs(args.out_dir, seed=args.seed)
    size = sum(p.stat().st_size for p in written)
    print(f"wrote {len(written)} files ({size / 1e6:.2f} MB) to {args.out_dir}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
