"""load_table: one test per bad-input case, asserting the message."""

import numpy as np
import pandas as pd
import pytest

from manireg.data import load_table


def test_csv_roundtrip(tmp_table):
    t = load_table(tmp_table, target="y")
    assert t.X.shape == (20, 3) and t.y.shape == (20,)
    assert t.feature_names == ["a", "b", "c"] and t.target_name == "y"
    assert t.X.dtype == np.float64


def test_parquet_and_npz_and_npy(tmp_path):
    rng = np.random.default_rng(0)
    df = pd.DataFrame(rng.normal(size=(10, 3)), columns=["a", "b", "y"])
    df.to_parquet(tmp_path / "t.parquet")
    t = load_table(tmp_path / "t.parquet", target="y")
    np.testing.assert_allclose(t.y, df["y"].to_numpy())
    np.savez(tmp_path / "t.npz", X=df[["a", "b"]].to_numpy(), y=df["y"].to_numpy())
    t2 = load_table(tmp_path / "t.npz")
    assert t2.X.shape == (10, 2) and t2.target_name == "y"
    np.save(tmp_path / "t.npy", df.to_numpy())
    t3 = load_table(tmp_path / "t.npy", target=2)
    np.testing.assert_allclose(t3.y, df["y"].to_numpy())
    assert t3.feature_names == ["c0", "c1"]


def test_features_only(tmp_table):
    t = load_table(tmp_table)
    assert t.y is None and t.X.shape == (20, 4)


def test_missing_file(tmp_path):
    with pytest.raises(ValueError, match="no such file"):
        load_table(tmp_path / "nope.csv")


def test_unknown_format(tmp_path):
    p = tmp_path / "data.xlsx"
    p.write_text("a,b\n1,2\n")
    with pytest.raises(ValueError, match="unknown data format '.xlsx'.*supported"):
        load_table(p)


def test_empty_file(tmp_path):
    p = tmp_path / "empty.csv"
    p.write_text("")
    with pytest.raises(ValueError, match="is empty"):
        load_table(p)


def test_missing_target_column(tmp_table):
    with pytest.raises(ValueError, match="target column 'price' is not in .*Columns are: 'a', 'b', 'c', 'y'"):
        load_table(tmp_table, target="price")


def test_misspelt_target_gets_a_suggestion(tmp_table):
    with pytest.raises(ValueError, match="target column 'Y' is not in .* Did you mean 'y'\\?"):
        load_table(tmp_table, target="Y")


def _with_id(tmp_path, name="sample_id"):
    rng = np.random.default_rng(0)
    df = pd.DataFrame(rng.normal(size=(20, 3)), columns=["a", "b", "y"])
    df.insert(0, name, np.arange(100, 120))
    path = tmp_path / "ids.csv"
    df.to_csv(path, index=False)
    return path


@pytest.mark.parametrize("name", ["sample_id", "id", "ID", "index"])
def test_id_column_is_refused_with_the_flag_that_fixes_it(tmp_path, name):
    path = _with_id(tmp_path, name)
    with pytest.raises(ValueError, match=f"look like row identifiers.*--drop {name}"):
        load_table(path, target="y")
    table = load_table(path, target="y", drop=[name])
    assert table.feature_names == ["a", "b"] and table.X.shape == (20, 2)
    # naming the features keeps what the user names
    assert load_table(path, target="y", features=[name, "a"]).feature_names == [name, "a"]


def test_numeric_column_not_named_like_an_id_is_kept(tmp_path):
    rng = np.random.default_rng(1)
    df = pd.DataFrame({"count": np.arange(20), "a": rng.normal(size=20), "y": rng.normal(size=20)})
    df.to_csv(tmp_path / "t.csv", index=False)
    assert load_table(tmp_path / "t.csv", target="y").feature_names == ["count", "a"]


def test_drop_of_a_missing_column_suggests(tmp_table):
    with pytest.raises(ValueError, match="to drop are not in .* Did you mean 'a'"):
        load_table(tmp_table, target="y", drop=["A"])


def test_non_numeric_columns(tmp_path):
    p = tmp_path / "t.csv"
    pd.DataFrame({"a": [1.0, 2.0, 3.0], "colour": ["r", "g", "b"], "y": [1, 2, 3]}).to_csv(p, index=False)
    with pytest.raises(ValueError, match="non-numeric feature column.*'colour'"):
        load_table(p, target="y")


def test_nan_and_inf_counted_and_located(tmp_path):
    p = tmp_path / "t.csv"
    df = pd.DataFrame({"a": [1.0, np.nan, 3.0, 4.0], "b": [1.0, 2.0, np.inf, 4.0], "y": [1, 2, 3, 4]})
    df.to_csv(p, index=False)
    with pytest.raises(ValueError, match=r"2 missing or infinite value\(s\).*'a': 1, 'b': 1.*first at row 1"):
        load_table(p, target="y")


def test_nan_in_target(tmp_path):
    p = tmp_path / "t.csv"
    pd.DataFrame({"a": [1.0, 2.0, 3.0], "y": [1.0, np.nan, 3.0]}).to_csv(p, index=False)
    with pytest.raises(ValueError, match="target 'y' has 1 missing"):
        load_table(p, target="y")


def test_too_few_rows(tmp_path):
    p = tmp_path / "t.csv"
    pd.DataFrame({"a": [1.0], "y": [2.0]}).to_csv(p, index=False)
    with pytest.raises(ValueError, match=r"1 data row\(s\); at least 2"):
        load_table(p, target="y")


def test_constant_column_warns(tmp_path):
    p = tmp_path / "t.csv"
    pd.DataFrame({"a": [1.0, 2.0, 3.0], "k": [5.0, 5.0, 5.0], "y": [1, 2, 3]}).to_csv(p, index=False)
    with pytest.warns(UserWarning, match="constant column.*'k'"):
        load_table(p, target="y")


def test_mismatched_lengths_npz(tmp_path):
    p = tmp_path / "t.npz"
    np.savez(p, X=np.zeros((5, 2)) + np.arange(5)[:, None], y=np.arange(4.0))
    with pytest.raises(ValueError, match="target has 4 values but there are 5 feature rows"):
        load_table(p)


def test_mismatched_named_arrays(tmp_path):
    p = tmp_path / "t.npz"
    np.savez(p, a=np.arange(5.0), b=np.arange(4.0), y=np.arange(5.0))
    with pytest.raises(ValueError, match="different lengths"):
        load_table(p, target="y")


def test_header_only_csv(tmp_path):
    p = tmp_path / "t.csv"
    p.write_text("a,b,y\n")
    with pytest.raises(ValueError, match=r"0 data row\(s\)"):
        load_table(p, target="y")
