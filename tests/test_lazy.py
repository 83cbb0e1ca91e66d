"""Tables on disk: open_table (npy, parquet, zarr), the chunked writer, and their validation messages."""

from __future__ import annotations

import numpy as np
import pytest

from manireg._validation import DataValidationError
from manireg.data import load_table, open_table, write_synthetic
from manireg.geometry.neighbors import data_fingerprint

FORMATS = ["npy", "parquet", "zarr"]


@pytest.fixture(scope="module")
def written(tmp_path_factory):
    root = tmp_path_factory.mktemp("lazy")
    return {ext: write_synthetic(root / f"g.{ext}", "graph_manifold", 700, d=2, ambient_dim=12, chunk_rows=160, seed=4)
            for ext in FORMATS}


@pytest.mark.parametrize("ext", FORMATS)
def test_lazy_rows_chunks_target_and_fingerprint_match_load_table(written, ext):
    s = written[ext]
    t = open_table(s.path, s.target_name, chunk_rows=128)
    full = load_table(s.path, s.target_name)
    assert t.shape == full.X.shape == (700, 12)
    idx = np.array([699, 0, 5, 5, 350, -1])
    np.testing.assert_array_equal(t.rows(idx), full.X[idx])  # any order, repeats, negative positions
    np.testing.assert_array_equal(t[10:20], full.X[10:20])
    starts, blocks = zip(*t.chunks())
    assert starts[0] == 0 and sum(len(b) for b in blocks) == 700 and max(len(b) for b in blocks) <= 160
    np.testing.assert_array_equal(np.vstack(blocks), full.X)
    np.testing.assert_array_equal(t.target(), full.y)
    # the streamed fingerprint is the one of the array in memory, so cell keys agree
    assert t.fingerprint() == data_fingerprint(full.X)


def test_writer_is_a_function_of_the_seed_not_of_memory(tmp_path):
    a = write_synthetic(tmp_path / "a.npy", "sphere", 500, d=2, ambient_dim=6, chunk_rows=100, seed=2)
    b = write_synthetic(tmp_path / "b.npy", "sphere", 500, d=2, ambient_dim=6, chunk_rows=100, seed=2)
    A, B = np.load(a.path), np.load(b.path)
    np.testing.assert_array_equal(A, B)
    X = A[:, :6].astype(float)
    # one manifold across blocks: every row lies on the unit 2-sphere embedded isometrically (closed form)
    np.testing.assert_allclose(np.linalg.norm(X, axis=1), 1.0, atol=1e-6)
    assert np.linalg.matrix_rank(X - 0, tol=1e-4) == 3  # a 3-D linear span, the same embedding in every block
    assert a.dimension == 2 and a.ambient_dim == 6 and a.target_name == "c6"
    with pytest.raises(FileExistsError, match="overwrite=True"):
        write_synthetic(a.path, "sphere", 10, seed=2)


def test_rendered_images_written_in_blocks(tmp_path):
    s = write_synthetic(tmp_path / "img.npy", "rendered_objects", 300, d=2, size=8, chunk_rows=64, target=False)
    X = np.load(s.path)
    assert X.shape == (300, 64) and s.target_name is None
    assert 0.0 <= X.min() and X.max() <= 1.0


@pytest.mark.parametrize("ext", FORMATS)
def test_nan_in_a_chunk_names_the_chunk_and_row(tmp_path, ext):
    X = np.random.default_rng(0).standard_normal((50, 3))
    X[37, 1] = np.nan
    X[41, 2] = np.inf
    p = tmp_path / f"bad.{ext}"
    if ext == "npy":
        np.save(p, X)
    elif ext == "parquet":
        import pyarrow as pa
        import pyarrow.parquet as pq

        pq.write_table(pa.table({f"x{j}": X[:, j] for j in range(3)}), p, row_group_size=10)
    else:
        import zarr

        zarr.open_group(str(p), mode="w").create_array("X", data=X, chunks=(10, 3))
    t = open_table(p, chunk_rows=10)
    with pytest.raises(DataValidationError, match=r"2 missing or infinite value\(s\).*first at row 37 \(chunk 3 of 5, rows 30-39"):
        t.scan()


def test_missing_file_wrong_format_and_folder(tmp_path):
    with pytest.raises(DataValidationError, match="no such file"):
        open_table(tmp_path / "nope.npy")
    (tmp_path / "t.txt").write_text("1,2\n")
    with pytest.raises(DataValidationError, match="unknown data format '.txt'"):
        open_table(tmp_path / "t.txt")
    (tmp_path / "fake.npy").write_text("this is not an npy file")
    with pytest.raises(DataValidationError, match="could not read .* as .npy"):
        open_table(tmp_path / "fake.npy")
    (tmp_path / "fake.parquet").write_bytes(b"PAR0 not parquet")
    with pytest.raises(DataValidationError, match="could not read .* as parquet"):
        open_table(tmp_path / "fake.parquet")
    (tmp_path / "dir").mkdir()
    with pytest.raises(DataValidationError, match="is a folder"):
        open_table(tmp_path / "dir")
    np.save(tmp_path / "one.npy", np.zeros((1, 3)))
    with pytest.raises(DataValidationError, match="at least 2 are needed"):
        open_table(tmp_path / "one.npy")


def test_target_and_column_selection(tmp_path, written):
    t = open_table(written["npy"].path, -1, drop=["c0"])
    assert t.target_name == "c12" and t.feature_names[0] == "c1" and t.shape == (700, 11)
    full = np.load(written["npy"].path)
    np.testing.assert_array_equal(t.rows([3]), full[[3], 1:12].astype(float))
    with pytest.raises(DataValidationError, match="Did you mean 'y'"):
        open_table(written["parquet"].path, "Y")
    with pytest.raises(DataValidationError, match="target array 'z' is not in"):
        open_table(written["zarr"].path, "z")


def test_missing_zarr_package_says_what_to_install(tmp_path, written, monkeypatch):
    import builtins

    real = builtins.__import__

    def no_zarr(name, *a, **k):
        if name == "zarr":
            raise ImportError("no zarr")
        return real(name, *a, **k)

    monkeypatch.setattr(builtins, "__import__", no_zarr)
    with pytest.raises(DataValidationError, match=r"pip install 'manireg\[scale\]'"):
        open_table(written["zarr"].path)


def test_pickled_table_is_small_and_reads_the_same(written):
    import pickle

    t = open_table(written["npy"].path, -1)
    blob = pickle.dumps(t)
    assert len(blob) < 5_000
    np.testing.assert_array_equal(pickle.loads(blob).rows([1, 2]), t.rows([1, 2]))


def test_nan_in_the_target_names_the_row_and_chunk(tmp_path):
    A = np.random.default_rng(1).standard_normal((50, 4))
    A[23, 3] = np.nan  # the target is the last column
    np.save(tmp_path / "t.npy", A)
    with pytest.raises(DataValidationError, match=r"target 'c3' has 1 missing or infinite value\(s\).*first at row 23 \(chunk 2\)"):
        open_table(tmp_path / "t.npy", -1, chunk_rows=10).scan()


def test_truncated_npy_is_named_at_open_and_at_read(tmp_path):
    A = np.arange(400.0).reshape(100, 4)
    p = tmp_path / "t.npy"
    np.save(p, A)
    t = open_table(p)
    size = p.stat().st_size
    with open(p, "r+b") as f:  # the file loses its last rows after it was opened
        f.truncate(size - 10 * 4 * 8)
    np.testing.assert_array_equal(t.rows([0, 5, 89]), A[[0, 5, 89]])  # rows still there read as before
    with pytest.raises(DataValidationError, match="ends before the rows its header promises; the file is truncated"):
        t.rows([95])
    with pytest.raises(DataValidationError, match="could not read .* as .npy"):
        open_table(p)


def test_fortran_order_and_column_subsets_read_the_same(tmp_path):
    # reference: numpy's own reader (np.load) of the same file
    A = np.asfortranarray(np.random.default_rng(2).standard_normal((60, 5)).astype(np.float32))
    np.save(tmp_path / "f.npy", A)
    t = open_table(tmp_path / "f.npy", target="c2", chunk_rows=7)
    ref = np.load(tmp_path / "f.npy").astype(np.float64)
    np.testing.assert_array_equal(t.rows([59, 0, 13]), ref[[59, 0, 13]][:, [0, 1, 3, 4]])
    np.testing.assert_array_equal(np.vstack([b for _, b in t.chunks()]), ref[:, [0, 1, 3, 4]])
    np.testing.assert_array_equal(t.target(), ref[:, 2])


@pytest.mark.parametrize("ext", FORMATS)
def test_rows_over_many_read_blocks_with_repeats_equal_the_array(written, ext):
    """rows() reads the distinct sorted rows a block at a time and casts each into place: a shuffled index with
    repeats, spanning many blocks, gives the in-memory rows exactly (float64)."""
    s = written[ext]
    t = open_table(s.path, s.target_name, chunk_rows=16)
    full = load_table(s.path, s.target_name)
    idx = np.random.default_rng(0).integers(-700, 700, size=1500)
    got = t.rows(idx)
    assert got.dtype == np.float64
    np.testing.assert_array_equal(got, full.X[idx])


def test_id_column_is_refused_on_disk_as_in_memory(tmp_path):
    """A row-number column among the features (common practice: it numbers the rows and carries no geometry)
    is refused by open_table with the same --drop fix as load_table, judged on the first block of rows."""
    import pandas as pd

    rng = np.random.default_rng(2)
    df = pd.DataFrame(rng.normal(size=(300, 3)), columns=["a", "b", "c"])
    df.insert(0, "unit_id", np.arange(300))
    df["y"] = rng.normal(size=300)
    path = tmp_path / "ids.parquet"
    df.to_parquet(path)
    for opener in (load_table, open_table):
        with pytest.raises(DataValidationError, match="--drop unit_id"):
            opener(path, "y")
    t = open_table(path, "y", drop=["unit_id"])
    assert t.feature_names == ["a", "b", "c"]
    assert open_table(path, "y", features=["unit_id", "a"]).shape == (300, 2)  # named on purpose: kept
