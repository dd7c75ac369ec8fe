"""Regenerate the bundled demo traces: ``python sample_traces/make_samples.py``."""
from pathlib import Path

from resweep.core.demo.quarry import write_demo_traces

if __name__ == "__main__":
    for p in write_demo_traces(Path(__file__).resolve().parent):
        print(f"wrote {p}")
