"""Run this project's cocotb bench: python run.py --simulator verilator|icarus|ghdl [options]."""

import sys
from pathlib import Path

from benchgen.cli import main

if __name__ == "__main__":
    sys.exit(main(["sim", str(Path(__file__).resolve().parent), *sys.argv[1:]]))
