"""Reference readers: hand-written files of each layout, and malformed files whose errors must name
the file, the line and the column."""

from __future__ import annotations

import numpy as np
import pytest
from verify_helpers import write_quad_field

from fvrans.errors import CaseError
from fvrans.verify.readers import read_columns, read_csv, read_field, read_table


def _write(tmp_path, name, text):
    p = tmp_path / name
    p.write_text(text)
    return p


# ------------------------------------------------------------------------------------------ CSV
def test_csv_with_comments_and_names(tmp_path):
    p = _write(tmp_path, "cp.csv", "# pressure coefficient\n\nx, cp\n0.0, 1.0\n# mid comment\n0.5, -0.25\n1.0,0.125\n")
    t = read_csv(p)
    assert t.names == ("x", "cp")
    np.testing.assert_array_equal(t.column("cp"), [1.0, -0.25, 0.125])
    np.testing.assert_array_equal(t.column(1), [0.0, 0.5, 1.0])  # 1-based column numbers
    np.testing.assert_array_equal(t.lines, [4, 6, 7])
    assert t.names_line == 3


def test_csv_ragged_row_names_file_and_line(tmp_path):
    p = _write(tmp_path, "r.csv", "x,cp\n0,1\n1,2,3\n")
    with pytest.raises(CaseError) as e:
        read_csv(p)
    msg = str(e.value)
    assert f"{p}:3:" in msg and "3 values" in msg and "2 columns" in msg


def test_csv_text_in_numeric_column(tmp_path):
    p = _write(tmp_path, "t.csv", "x,cp,cf\n0,1,2\n1,abc,2\n")
    with pytest.raises(CaseError) as e:
        read_csv(p)
    msg = str(e.value)
    assert f"{p}:3:" in msg and "column 2" in msg and "'cp'" in msg and "'abc'" in msg


def test_csv_missing_column_names_file_line_and_column(tmp_path):
    p = _write(tmp_path, "m.csv", "# c\nx,cp\n0,1\n")
    t = read_csv(p)
    with pytest.raises(CaseError) as e:
        t.column("cf")
    msg = str(e.value)
    assert str(p) in msg and "'cf'" in msg and "x, cp" in msg and "line 2" in msg
    with pytest.raises(CaseError, match="no column number 3"):
        t.column(3)


def test_csv_duplicate_and_empty(tmp_path):
    with pytest.raises(CaseError, match=r":1: the column name 'x' appears twice"):
        read_csv(_write(tmp_path, "d.csv", "x,x\n1,2\n"))
    with pytest.raises(CaseError, match="no rows of numbers"):
        read_csv(_write(tmp_path, "e.csv", "# nothing\nx,y\n"))
    with pytest.raises(CaseError, match="does not exist"):
        read_csv(tmp_path / "absent.csv")


# ------------------------------------------------------------------------ plain-text column files
def test_columns_variables_and_zone_lines(tmp_path):
    text = """# skin friction, two stations
title = "data set"
VARIABLES = "x/c", "cf", "p wall"
ZONE T="upper surface", I=3
0.0  1.0D-03  1
0.5  2.0e-3   2
1.0  3.0E-03  3
zone t = 'lower surface'
0.0, 4.0e-3, 4
1.0, 5.0e-3, 5
"""
    z = read_columns(_write(tmp_path, "cf.dat", text))
    assert len(z.zones) == 2
    a, b = z.zones
    assert a.names == ("x/c", "cf", "p wall") and a.names_line == 3
    assert a.title == "upper surface" and b.title == "lower surface"
    np.testing.assert_allclose(a.column("cf"), [1e-3, 2e-3, 3e-3])  # Fortran exponent read
    np.testing.assert_array_equal(b.column("p wall"), [4, 5])
    np.testing.assert_array_equal(b.lines, [9, 10])
    assert z.zone("lower surface") is b and z.zone(1) is a
    with pytest.raises(CaseError, match="has 2 zones .*choose one"):
        z.zone(None)
    with pytest.raises(CaseError, match="no zone 3"):
        z.zone(3)


def test_columns_blank_lines_and_header_lines(tmp_path):
    text = """% profile at three stations
y u v
0.0 0.0 0.0
0.5 1.0 0.1

0.0 0.0 0.0
0.5 2.0 0.2
station x = 2
0.0 0.0 0.0
0.5 3.0 0.3
y u v
0.0 0.0 0.0
0.7 4.0 0.4
"""
    z = read_columns(_write(tmp_path, "prof.txt", text))
    assert [len(t.data) for t in z.zones] == [2, 2, 2, 2]
    assert z.zones[2].title == "station x = 2"
    np.testing.assert_array_equal([t.column("u")[1] for t in z.zones], [1.0, 2.0, 3.0, 4.0])
    assert read_table(_write(tmp_path, "one.txt", "y u\n0 1\n1 2\n")).names == ("y", "u")


def test_columns_without_names(tmp_path):
    t = read_table(_write(tmp_path, "plain.dat", "# no names\n1 2\n3 4\n"))
    assert t.names == ("1", "2")
    np.testing.assert_array_equal(t.column(2), [2, 4])


def test_columns_malformed(tmp_path):
    p = _write(tmp_path, "bad.dat", "x cp\n0 1\n1 2 3\n")
    with pytest.raises(CaseError) as e:
        read_columns(p)
    assert f"{p}:3:" in str(e.value) and "3 values" in str(e.value)
    p = _write(tmp_path, "bad2.dat", "variables = x, cp\n0 1\n1 n/a\n")
    with pytest.raises(CaseError) as e:
        read_columns(p)
    assert f"{p}:3:" in str(e.value) and "column 2 ('cp')" in str(e.value) and "'n/a'" in str(e.value)
    p = _write(tmp_path, "bad3.dat", "variables = x cp\n0 1\nvariables = x cf\n0 1\n")
    with pytest.raises(CaseError, match=r"bad3.dat:3: the variables change"):
        read_columns(p)
    t = read_table(_write(tmp_path, "ok.dat", "variables = x cp\n0 1\n"))
    with pytest.raises(CaseError) as e:
        t.column("cf")
    assert "ok.dat" in str(e.value) and "'cf'" in str(e.value) and "named on line 1" in str(e.value)


# ------------------------------------------------------------------------------------- field files
def test_field_point_data_linear_exact_and_no_extrapolation(tmp_path):
    # a linear function is reproduced exactly by linear interpolation within the cells
    p = tmp_path / "f.vtu"
    write_quad_field(p, 4, 3, 2.0, 1.0, point_fn=lambda x, y: 2 * x + 3 * y + 1)
    ff = read_field(p)
    xy = np.array([[0.3, 0.2], [1.77, 0.91], [2.0, 1.0], [2.5, 0.5], [-0.1, 0.5]])
    v = ff.sample("f", xy)
    np.testing.assert_allclose(v[:3], 2 * xy[:3, 0] + 3 * xy[:3, 1] + 1, rtol=1e-12)
    assert np.isnan(v[3]) and np.isnan(v[4])  # outside: NaN, never extrapolated
    np.testing.assert_allclose(ff.cell_area.sum(), 2.0)


def test_field_cell_data_constant_and_linear(tmp_path):
    p = tmp_path / "c.vtu"
    write_quad_field(p, 4, 4, 1.0, 1.0, cell_fn=lambda x, y: x - 2 * y)
    ff = read_field(p)
    # constant: the value of the containing cell (centre of cell (1, 2) is (0.375, 0.625))
    v = ff.sample("f", np.array([[0.3, 0.55]]), cell_values="constant")
    np.testing.assert_allclose(v, [0.375 - 2 * 0.625])
    # linear between centres: exact for a linear function inside the hull of the centres
    xy = np.array([[0.2, 0.3], [0.61, 0.8]])
    np.testing.assert_allclose(ff.sample("f", xy), xy[:, 0] - 2 * xy[:, 1], rtol=1e-12)
    # between the outermost centres and the boundary: the containing cell's value
    np.testing.assert_allclose(ff.sample("f", np.array([[0.05, 0.05]])), [0.125 - 2 * 0.125])
    np.testing.assert_allclose(ff.sample("velocity", xy, component=1), -(xy[:, 0] - 2 * xy[:, 1]), rtol=1e-12)
    with pytest.raises(CaseError, match="has 3 components"):
        ff.sample("velocity", xy)
    with pytest.raises(CaseError, match=r"no field 'pressure'; the file has f, velocity"):
        ff.sample("pressure", xy)


def test_field_unreadable(tmp_path):
    p = _write(tmp_path, "x.vtu", "not a mesh")
    with pytest.raises(CaseError, match="cannot be read as a field file"):
        read_field(p)
