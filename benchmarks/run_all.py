"""Run every benchmark script in this folder, one after another, and print their figures."""

import subprocess
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent

if __name__ == "__main__":
    failed = 0
    for script in sorted(HERE.glob("*_bench.py")):
        print(f"\n=== {script.name} ===", flush=True)
        failed += subprocess.call([sys.executable, str(script)]) != 0
    sys.exit(1 if failed else 0)
