"""Write the demo workbooks (the generator lives in xlpolicy/demo.py).

python examples/make_demo.py            # rewrites examples/demo-shop.xlsx and demo-wide.xlsx
python examples/make_demo.py OUT_DIR    # writes them to OUT_DIR instead
"""

import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from xlpolicy.demo import main  # noqa: E402

if __name__ == "__main__":
    raise SystemExit(main(sys.argv[1:] or [str(Path(__file__).resolve().parent)]))
