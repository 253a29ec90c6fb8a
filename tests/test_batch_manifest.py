"""Tests of the batch manifest reader: layout, validation, and refusing paths that escape."""
from __future__ import annotations

import os

import pytest

from orbweigh.errors import InputError
from orbweigh.manifest import read_manifest

HEADER = "id,log,P,T,e,a,i,Omega,omega,T_err,last_epoch,parallax_mas,parallax_err_mas,q,q_err"


@pytest.fixture
def folder(tmp_path):
    (tmp_path / "logs").mkdir()
    (tmp_path / "logs" / "a.csv").write_text("epoch,theta,rho\n2000.0,10,1\n")
    (tmp_path / "outside.csv").write_text("epoch,theta,rho\n2000.0,10,1\n")
    inner = tmp_path / "cat"
    inner.mkdir()
    (inner / "logs").symlink_to(tmp_path / "logs")   # a folder link leaving 'cat'
    (inner / "a.csv").write_text("epoch,theta,rho\n2000.0,10,1\n")
    (inner / "alias.csv").symlink_to(inner / "a.csv")  # a link that stays inside
    return inner


def _write(folder, text, name="manifest.csv"):
    path = folder / name
    path.write_text(text)
    return path


def test_full_row_is_read_in_internal_units(folder):
    path = _write(folder, HEADER + "\nA B,a.csv,41.623,JD2451545.0,0.2763,0.907,59.025,23.717,"
                  "219.907,36.525,J2010.5,12.5,0.4,0.8,0.05\n")
    (entry,) = read_manifest(path)
    assert entry.problem is None
    assert entry.log == str((folder / "a.csv").resolve())
    # J2000.0 = JD 2451545.0 TT by definition (IAU 1976 system): T is 2000.0 Julian.
    assert entry.previous.periastron_yr == pytest.approx(2000.0, abs=1e-9)
    assert entry.previous.period_yr == 41.623 and entry.previous.node_deg == 23.717
    # T written as a JD: its error is in days; 36.525 d = 0.1 Julian yr of 365.25 d (IAU).
    assert entry.previous_errors == {"T": pytest.approx(0.1, rel=1e-12)}
    assert entry.last_epoch_yr == pytest.approx(2010.5, abs=1e-12)
    assert entry.parallax_mas == (12.5, 0.4) and entry.mass_ratio == (0.8, 0.05)
    assert entry.fields["T"] == "JD2451545.0"  # the row as written is kept


def test_plain_years_are_besselian(folder):
    path = _write(folder, "id,log,P,T,e,a,i,Omega,omega\nx,a.csv,10,1950.0,0.1,1,10,20,30\n")
    (entry,) = read_manifest(path)
    # B1950.0 = JD 2433282.4235 (Lieske 1979, A&A 73, 282; memory), i.e. Julian year
    # 2000 + (2433282.4235 - 2451545) / 365.25 = 1949.999790.
    assert entry.previous.periastron_yr == pytest.approx(1949.999790, abs=2e-6)


@pytest.mark.parametrize("log, expected", [
    ("../outside.csv", "leads outside the manifest's folder"),
    ("logs/a.csv", "leads outside the manifest's folder"),      # through the folder link
    ("missing.csv", "does not exist"),
    ("", "no measurement log given"),
])
def test_log_paths_that_escape_or_are_missing_fail_that_row(folder, log, expected):
    path = _write(folder, f"id,log\nfine,a.csv\nbad,{log}\nalias,alias.csv\n")
    fine, bad, alias = read_manifest(path)
    assert fine.problem is None and alias.problem is None
    assert bad.problem.startswith(f"{path}, line 3, column 'log': ")
    assert expected in bad.problem


def test_absolute_path_outside_is_refused(folder):
    outside = (folder.parent / "outside.csv").resolve()
    path = _write(folder, f"id,log\nabs,{outside}\n")
    (entry,) = read_manifest(path)
    assert "leads outside" in entry.problem and entry.log is None


@pytest.mark.parametrize("cells, column, expected", [
    ("x,a.csv,ten,2000,0.1,1,10,20,30", "P", "expected a number"),
    ("x,a.csv,10,2000,1.2,1,10,20,30", "e", "0 <= e < 1"),
    ("x,a.csv,10,2000,0.1,,10,20,30", "a", "missing a"),
    ("x,a.csv,10,2000x,0.1,1,10,20,30", "T", "cannot read '2000x' as an epoch"),
    ("x,a.csv,-5,2000,0.1,1,10,20,30", "P", "positive period"),
])
def test_broken_previous_elements(folder, cells, column, expected):
    path = _write(folder, "# a catalogue\nid,log,P,T,e,a,i,Omega,omega\n" + cells + "\n")
    (entry,) = read_manifest(path)
    assert entry.problem.startswith(f"{path}, line 3, column '{column}'")
    assert expected in entry.problem
    assert entry.previous is None


def test_pairs_coordinates_and_field_count(folder):
    path = _write(folder, "id,log,parallax_mas,parallax_err_mas,ra_deg,dec_deg\n"
                  "p,a.csv,12,,,\n"
                  "c,a.csv,,,100,95\n"
                  "n,a.csv,12,1,10,20,extra\n")
    p, c, n = read_manifest(path)
    assert "column 'parallax_err_mas'" in p.problem and "give both" in p.problem
    assert "column 'dec_deg'" in c.problem and "outside (-90, 90)" in c.problem
    assert "line 4" in n.problem and "7 fields where the header has 6" in n.problem
    assert (n.ra_deg, n.dec_deg, n.parallax_mas) == (10.0, 20.0, (12.0, 1.0))


def test_mass_ratio_needs_a_parallax_by_the_rule_of_the_command_line(folder):
    # The same rule as 'fit --mass-ratio' without '--parallax' (masses.check_mass_inputs),
    # in the manifest's own column names.
    q = read_manifest(_write(folder, "id,log,q,q_err\nq,a.csv,0.8,0.1\n"))[0]
    assert "column 'q'" in q.problem
    assert "q splits the total mass between the components" in q.problem
    assert "give parallax_mas too" in q.problem
    bad = read_manifest(_write(folder, "id,log,parallax_mas,parallax_err_mas\nz,a.csv,-3,1\n"))
    assert "column 'parallax_mas'" in bad[0].problem and "not positive" in bad[0].problem


def test_duplicate_ids_refuse_the_manifest_naming_both_lines(folder):
    path = _write(folder, "id,log\np,a.csv\nc,a.csv\np,a.csv\nc,alias.csv\nx,a.csv\n")
    with pytest.raises(InputError) as refused:
        read_manifest(path)
    message = str(refused.value)
    assert message.startswith(f"{path}: ids must be unique")
    assert "id 'p' on line 2 and line 4" in message and "id 'c' on line 3 and line 5" in message
    toml = _write(folder, '[[system]]\nid = "a"\nlog = "a.csv"\n\n[[system]]\nid = "a"\n'
                  'log = "alias.csv"\n', "m.toml")
    with pytest.raises(InputError, match="id 'a' on line 1 and line 5"):
        read_manifest(toml)


def test_byte_order_mark_is_read(folder):
    path = folder / "bom.csv"
    path.write_bytes("id,log,ra_deg,dec_deg\r\nA,a.csv,10,20\r\n".encode("utf-8-sig"))
    (entry,) = read_manifest(path)
    assert entry.problem is None and entry.id == "A" and entry.dec_deg == 20.0
    toml = folder / "bom.toml"
    toml.write_bytes('[[system]]\nid = "B"\nlog = "a.csv"\n'.encode("utf-8-sig"))
    assert read_manifest(toml)[0].id == "B"


def test_unclosed_quote_fails_its_own_line_and_keeps_every_later_row(folder):
    path = _write(folder, 'id,log,ra_deg,dec_deg\nA,a.csv,10,20\nB,"a.csv,10,20\n'
                  'C,a.csv,30,40\n"D",a.csv,50,60\n')
    a, b, c, d = read_manifest(path)
    assert (a.problem, c.problem, d.problem) == (None, None, None)
    assert (c.id, c.ra_deg, d.id, d.dec_deg) == ("C", 30.0, "D", 60.0)
    assert b.id == "B" and b.line == 3 and b.problem.count("line 3") == 1
    assert b.problem.startswith(f"{path}, line 3, column 'log': a quote opens at character 3")
    assert "not closed on this line" in b.problem
    with pytest.raises(InputError, match=r"line 1: a quote opens at character 4"):
        read_manifest(_write(folder, 'id,"log\nA,a.csv\n'))


def test_line_numbers_count_only_line_ends(folder):
    # A form feed or U+2028 inside a value is no line end (Python's str.splitlines would
    # split there); the row after it keeps its line number.
    path = _write(folder, "id,log\nA\x0cB,a.csv\nC\u2028D,a.csv\nE,missing.csv\n")
    ab, cd, e = read_manifest(path)
    assert (ab.id, cd.id) == ("A\x0cB", "C\u2028D")
    assert e.problem.startswith(f"{path}, line 4, column 'log'")


# Sexagesimal forms as on the command line (reductions.parse_right_ascension and
# parse_declination, one reader). By hand: 05h14m32.3s = 15 (5 + 14/60 + 32.3/3600) deg
# = 78.634583 deg; -08d12m05s = -(8 + 12/60 + 5/3600) deg = -8.201389 deg.
@pytest.mark.parametrize("ra, dec", [("05:14:32.3", "-08:12:05"), ("05h14m32.3s", "-08d12m05s"),
                                     ("5 14 32.3", "-8 12 5"), ("78.6345833", "-8.2013889")])
def test_sexagesimal_coordinates(folder, ra, dec):
    (entry,) = read_manifest(_write(folder, f"id,log,ra_deg,dec_deg\nx,a.csv,{ra},{dec}\n"))
    assert entry.problem is None
    assert entry.ra_deg == pytest.approx(78.6345833, abs=1e-6)
    assert entry.dec_deg == pytest.approx(-8.2013889, abs=1e-6)


def test_unreadable_coordinates_name_their_column(folder):
    ra, dec = read_manifest(_write(folder, "id,log,ra_deg,dec_deg\nr,a.csv,5h14x,10\n"
                                           "d,a.csv,10,-8d12q\n"))
    assert "line 2, column 'ra_deg'" in ra.problem and "neither degrees nor" in ra.problem
    assert "line 3, column 'dec_deg'" in dec.problem and "+dd:mm:ss" in dec.problem


def test_velocities_and_mass_ratio_exclude_each_other(folder):
    (folder / "v.csv").write_text("epoch,component,rv\n2450000.5,1,3.0\n")
    path = _write(folder, "id,log,rv_log,q,q_err\nv,a.csv,v.csv,,\nboth,a.csv,v.csv,0.8,0.1\n"
                  "out,a.csv,../../outside.csv,,\n")
    v, both, out = read_manifest(path)
    assert v.problem is None and v.rv_log == str((folder / "v.csv").resolve())
    assert "line 3, column 'q': with rv_log the velocity log gives K1, K2 (hence q)" in both.problem
    assert "line 4, column 'rv_log'" in out.problem and "outside" in out.problem


def test_whole_manifest_errors(folder, tmp_path):
    with pytest.raises(InputError, match="unknown column.*'paralax_mas'"):
        read_manifest(_write(folder, "id,log,paralax_mas\nx,a.csv,3\n"))
    with pytest.raises(InputError, match="no 'log' column"):
        read_manifest(_write(folder, "id,path\nx,a.csv\n"))
    with pytest.raises(InputError, match="cannot read the file"):
        read_manifest(tmp_path / "nothing.csv")
    with pytest.raises(InputError, match="lists no systems"):
        read_manifest(_write(folder, "id,log\n"))


def test_toml_manifest_with_lines(folder):
    path = _write(folder, 'title_ignored = 1\n', "bad.toml")
    with pytest.raises(InputError, match=r"only an array of tables \[\[system\]\]"):
        read_manifest(path)
    path = _write(folder, '# catalogue\n[[system]]\nid = "a"\nlog = "a.csv"\nP = 10\n'
                  'T = "J2000.0"\ne = 0.5\na = 1.5\ni = 80\nOmega = 10\nomega = 20\n\n'
                  '[[system]]\nid = "b"\nlog = "../outside.csv"\n', "manifest.toml")
    a, b = read_manifest(path)
    assert a.problem is None and a.previous.e == 0.5 and a.previous.periastron_yr == 2000.0
    assert b.problem.startswith(f"{path}, line 13, column 'log'")


def test_symlinked_manifest_folder_still_confines(folder, tmp_path):
    # Opening the manifest through a link to its folder changes nothing.
    link = tmp_path / "link"
    os.symlink(folder, link)
    path = _write(folder, "id,log\nok,a.csv\nout,../outside.csv\n")
    ok, out = read_manifest(link / path.name)
    assert ok.problem is None and "outside" in out.problem


def test_batch_command_refuses_repeated_ids_before_writing(folder, tmp_path, capsys):
    from orbweigh.cli.main import main
    path = _write(folder, "\ufeffid,log\nA,a.csv\nB,a.csv\nA,alias.csv\n")   # with a BOM
    out = tmp_path / "out"
    assert main(["batch", str(path), "--out", str(out), "--workers", "1"]) == 2
    err = capsys.readouterr().err
    assert err.startswith(f"orbweigh batch: error: {path}: ids must be unique")
    assert "id 'A' on line 2 and line 4" in err and "Traceback" not in err
    assert not out.exists()


def test_device_and_fifo_manifests_are_refused_at_once(tmp_path):
    # A manifest path naming a device or a FIFO would block or read without end.
    fifo = tmp_path / "manifest.csv"
    os.mkfifo(fifo)
    for path in (fifo, type(fifo)("/dev/zero")):
        with pytest.raises(InputError, match="not a regular file"):
            read_manifest(path)
