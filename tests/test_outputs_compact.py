"""The compressed draws table: gzip round trip, reproducible bytes, which file readers take.

Behaviour-only checks (file formats of kinfit's own outputs); the reference for the content is
pandas' own CSV reader (reference library), which must read back the values written.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from kinfit.core.files import draws_file, write_frame_atomic


def test_gzip_draws_round_trip_and_are_reproducible(tmp_path):
    rng = np.random.default_rng(0)
    frame = pd.DataFrame({"k_ref": rng.lognormal(size=500), "order": rng.normal(1.5, 0.1, 500),
                          "walker": np.arange(500) % 32, "step": np.arange(500) // 32})
    a = write_frame_atomic(tmp_path / "a.csv.gz", frame)
    b = write_frame_atomic(tmp_path / "b.csv.gz", frame)
    assert a.read_bytes() == b.read_bytes()  # no time stamp in the gzip header
    back = pd.read_csv(a)
    pd.testing.assert_frame_equal(back, frame, check_exact=True)
    plain = write_frame_atomic(tmp_path / "c.csv", frame)
    assert a.stat().st_size < 0.7 * plain.stat().st_size


def test_draws_file_prefers_the_compressed_table(tmp_path):
    assert draws_file(tmp_path) is None
    (tmp_path / "posterior_draws.csv").write_text("a\n1\n")
    assert draws_file(tmp_path).name == "posterior_draws.csv"
    write_frame_atomic(tmp_path / "posterior_draws.csv.gz", pd.DataFrame({"a": [1]}))
    assert draws_file(tmp_path).name == "posterior_draws.csv.gz"
