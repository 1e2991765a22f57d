"""fieldapp.insitu_io: the CPT, SPT and load test CSV formats, read and checked whole."""

import pytest

from fieldapp.insitu_io import InsituFileError, parse_cpt, parse_load_test, parse_spt

WHERE = dict(name="CPT-1", easting=100.0, northing=200.0, ground_level=12.5)


def errors_of(fn, data, **kw):
    with pytest.raises(InsituFileError) as info:
        fn(data, **kw)
    return [(e.row, e.column) for e in info.value.errors], str(info.value)


def test_cpt_file_is_read_with_optional_u2():
    s = parse_cpt(b"depth_m,qc_mpa,fs_kpa,u2_kpa\n0.02,1.5,12,0\n0.04,1.7,14,3.5\n", **WHERE)
    assert s.qc_mpa.tolist() == [1.5, 1.7] and s.u2_kpa.tolist() == [0.0, 3.5]
    assert s.ground_level == 12.5
    s = parse_cpt("qc_mpa;depth_m;fs_kpa\n1.5;0.02;12\n1.7;0.04;14\n".encode(), **WHERE)
    assert s.u2_kpa is None and s.depths_m.tolist() == [0.02, 0.04]


def test_cpt_errors_name_row_and_column():
    data = b"depth_m,qc_mpa,fs_kpa\n0.02,1.5,12\n0.04,abc,14\n0.06,200,14\n0.08,2,\n"
    where, text = errors_of(parse_cpt, data, **WHERE)
    assert where == [(3, "qc_mpa"), (4, "qc_mpa"), (5, "fs_kpa")]
    assert "row 3, column qc_mpa" in text


def test_cpt_depths_must_increase():
    where, _ = errors_of(parse_cpt, b"depth_m,qc_mpa,fs_kpa\n0.1,1,1\n0.3,1,1\n0.2,1,1\n", **WHERE)
    assert where == [(4, "depth_m")]


def test_optional_column_on_some_rows_only_is_refused():
    where, text = errors_of(parse_cpt, b"depth_m,qc_mpa,fs_kpa,u2_kpa\n0.1,1,1,5\n0.2,1,1,\n",
                            **WHERE)
    assert where == [(3, "u2_kpa")] and "every row or on none" in text


def test_header_problems_are_all_reported():
    where, _ = errors_of(parse_cpt, b"depth,qc_mpa,qc_mpa\n1,2,3\n", **WHERE)
    assert (1, "depth") in where and (1, "qc_mpa") in where and (1, "depth_m") in where
    assert (1, "fs_kpa") in where


def test_decimal_comma_gets_a_hint():
    _, text = errors_of(parse_cpt, b'depth_m,qc_mpa,fs_kpa\n0.1,"1,5",1\n0.2,2,1\n', **WHERE)
    assert "decimal mark" in text


def test_not_utf8_and_empty_files_are_refused():
    assert errors_of(parse_cpt, b"\xff\xfe\x00d", **WHERE)[0] == [(0, "")]
    assert "no readings" in errors_of(parse_cpt, b"depth_m,qc_mpa,fs_kpa\n", **WHERE)[1]


def test_design_core_limits_become_file_errors():
    # one reading only: the sounding needs at least 2
    _, text = errors_of(parse_cpt, b"depth_m,qc_mpa,fs_kpa\n0.1,1,1\n", **WHERE)
    assert "at least 2" in text


def test_spt_file():
    p = parse_spt(b"depth_m,n,energy_ratio\n1.5,8,60\n3.0,12,72\n", **WHERE)
    assert p.n60().tolist() == [8.0, 14.4]
    where, _ = errors_of(parse_spt, b"depth_m,n,energy_ratio\n1.5,8.5,60\n3.0,12,10\n", **WHERE)
    assert where == [(2, "n"), (3, "energy_ratio")]


def test_load_test_file_with_holds_and_cycles():
    data = (b"load_kn,settlement_mm,time,hold,cycle\n0,0,0,0,1\n500,1.0,1,1,1\n500,1.1,60,1,1\n"
            b"0,0.4,70,2,1\n1000,2.6,80,3,2\n")
    rec = parse_load_test(data)
    assert rec.hold.tolist() == [0, 1, 1, 2, 3] and rec.cycle.tolist() == [1, 1, 1, 1, 2]
    assert rec.time_min.tolist() == [0, 1, 60, 70, 80]


def test_load_test_time_and_hold_order():
    where, _ = errors_of(parse_load_test, b"load_kn,settlement_mm,time\n0,0,0\n10,1,5\n20,2,4\n")
    assert where == [(4, "time")]
    where, _ = errors_of(parse_load_test, b"load_kn,settlement_mm,hold\n0,0,1\n10,1,2\n20,2,1\n")
    assert where == [(4, "hold")]


def test_blank_lines_keep_spreadsheet_row_numbers():
    where, _ = errors_of(parse_load_test, b"load_kn,settlement_mm\n0,0\n\n10,x\n")
    assert where == [(4, "settlement_mm")]
