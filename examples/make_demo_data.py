"""Regenerate the synthetic Mount Kerrow series (fictional volcano) with its truth.

    python examples/make_demo_data.py examples/

writes measurements.csv and truth.csv: made by ventsource's own forward model
from the true parameters in ventsource.demo.truth_table plus 15 % log-normal noise.
"""
import sys

from ventsource.demo import make_demo_data

if __name__ == "__main__":
    print(make_demo_data(sys.argv[1] if len(sys.argv) > 1 else "."))
