"""Regenerate the synthetic Mount Kerrow series (fictional volcano) with its truth.

    python examples/make_demo_data.py

writes examples/mount_kerrow_synthetic.csv (60 noisy measurements) and
examples/mount_kerrow_truth.csv (true parameters, episode and noise-free ratios of
every row), made by ventsource's own forward model from the true parameters in
ventsource.workflow.demo.truth_table plus 15 % log-normal noise (seeded).
"""
import os
import shutil
import tempfile

from ventsource.workflow.demo import make_demo_data

HERE = os.path.dirname(os.path.abspath(__file__))

if __name__ == "__main__":
    with tempfile.TemporaryDirectory() as tmp:
        make_demo_data(tmp)
        shutil.copy(os.path.join(tmp, "measurements.csv"), os.path.join(HERE, "mount_kerrow_synthetic.csv"))
        shutil.copy(os.path.join(tmp, "truth.csv"), os.path.join(HERE, "mount_kerrow_truth.csv"))
    print(f"wrote {HERE}/mount_kerrow_synthetic.csv and {HERE}/mount_kerrow_truth.csv")
