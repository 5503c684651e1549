"""Regenerate demo/cycling_commute.csv from its fixed seed: `python demo/generate.py`."""

from pathlib import Path

from auditor.demo import DEMO_FILE, DEMO_SEED, make_demo_frame

if __name__ == "__main__":
    target = Path(__file__).resolve().parent / DEMO_FILE
    make_demo_frame(DEMO_SEED).to_csv(target, index=False)
    print(f"wrote {target}")
