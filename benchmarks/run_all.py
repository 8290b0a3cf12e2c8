"""Run every benchmark script in this folder, one after another, and print their figures."""

import os
import subprocess
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent

if __name__ == "__main__":
    failed = []
    print(f"load average at start: {' '.join(f'{x:.2f}' for x in os.getloadavg())} (1, 5, 15 min)", flush=True)
    for script in sorted(HERE.glob("*_bench.py")):
        print(f"\n=== {script.name} ===", flush=True)
        if subprocess.call([sys.executable, str(script)]) != 0:
            failed.append(script.name)
    print(f"\nload average at end: {' '.join(f'{x:.2f}' for x in os.getloadavg())} (1, 5, 15 min)")
    print("missed a target: " + ", ".join(failed) if failed else "every figure meets its target")
    sys.exit(1 if failed else 0)
