"""Write the demo's invented study: five fictional cells x baseline / UP-113 / washout, and its sheet.

    python sample_data/study/make_study.py            # rewrites the files beside this script
    python sample_data/study/make_study.py OUT_DIR    # writes them into another folder

The scenario is in :mod:`app.demo_study` (``analysis.synthetic`` with fixed seeds): no cell was
recorded; NL-S01 to NL-S05 and UP-113 are fictional. The same run writes the same bytes.
"""

from __future__ import annotations

import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent.parent))

from app.demo_study import write_demo_study  # the checkout on the path first


def main(argv: list[str]) -> int:
    folder = Path(argv[0]) if argv else HERE
    for path in write_demo_study(folder):
        print(f"wrote {path}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main(sys.argv[1:]))
