"""The command line as a user meets it: messages in option words, exit codes, pipes,
degenerate images, mistyped options, quiet runs and progress labels.

Exit codes are those of the README's table and ``cavitas/_errors.py``; 141 = 128 + SIGPIPE
and "a closed pipe ends a command quietly" are POSIX shell practice (as ``cat`` and
``grep`` do); the JSON checks use the standard library's parser as the outside judge of
strict JSON (RFC 8259 has no NaN). Pipe and exit-code cases run the installed console
script, the others ``cavitas.cli.main``.
"""

from __future__ import annotations

import fcntl
import json
import os
import pty
import re
import struct
import subprocess
import sys
import termios
from pathlib import Path

import numpy as np
import pytest
import tifffile

from cavitas._json import dumps
from cavitas._numba_cache import COMPILING
from cavitas.cli import build_parser, main
from cavitas.io import write

CAVITAS = str(Path(sys.executable).parent / "cavitas")  # the installed console script

#: A Python keyword argument in a message (``spacing=``, ``force=True``): never on the CLI.
KEYWORD_ARGUMENT = re.compile(r"(?<![-\w])[a-z]+(?:_[a-z]+)*=")


def _strict_json(path: Path):
    """Parse with the standard library, refusing the non-JSON constants NaN / Infinity."""
    def refuse(name):
        raise AssertionError(f"{path} holds the non-JSON constant {name}")
    return json.loads(Path(path).read_text(encoding="utf-8"), parse_constant=refuse)


def _cells(shape=(40, 40)) -> np.ndarray:
    """A dark background with bright-walled square cells (invented; regression data)."""
    image = np.full(shape, 20, np.uint8)
    image[4:36, 4:36] = 200
    for y in (7, 21):
        for x in (7, 21):
            image[y:y + 11, x:x + 11] = 20
    return image


def _err_lines(stderr: str, command: str) -> list[str]:
    lines = [line for line in stderr.splitlines() if line.strip()]
    assert lines and all(line.startswith(f"cavitas {command}: ") for line in lines), stderr
    assert "Traceback" not in stderr
    return lines


# -- item 6: messages in the command line's words ----------------------------------------

def _option_cases(tmp_path):
    np.save(tmp_path / "plain.npy", _cells())
    tifffile.imwrite(tmp_path / "hyper.tif", np.zeros((3, 2, 16, 16), np.uint8), imagej=True,
                     metadata={"axes": "TCYX"})
    (tmp_path / "block.raw").write_bytes(bytes(64))
    np.save(tmp_path / "labels.npy", np.arange(12, dtype=np.int32).reshape(3, 4))
    npy = str(tmp_path / "plain.npy")
    return [  # (arguments, exit code, words the message must hold)
        (["segment", npy, "--min-volume", "5"], 2, ["--min-volume", "--spacing"]),
        (["segment", npy, "--level-fraction", "0.5"], 2, ["--level-fraction", "--region breach"]),
        (["segment", str(tmp_path / "hyper.tif")], 3, ["--time N", "3 time point"]),
        (["segment", str(tmp_path / "hyper.tif"), "--time", "7"], 2, ["--time 7", "0 to 2"]),
        (["segment", npy, "--top", "0"], 2, ["--top must be"]),
        (["segment", npy, "--split-fraction", "2"], 2, ["--split-fraction must be"]),
        (["segment", npy, "--relative-persistence", "0"], 2, ["--relative-persistence must"]),
        (["segment", npy, "--safety", "0"], 2, ["--safety must be"]),
        (["segment", npy, "--connectivity", "5"], 2, ["--connectivity must be"]),
        (["segment", npy, "--smooth", "-1"], 2, ["--smooth must be"]),
        (["segment", npy, "--label-format", ".doc"], 2, ["--label-format must be"]),
        (["info", str(tmp_path / "block.raw")], 2, ["--shape", "--dtype", "--byte-order"]),
        (["info", str(tmp_path / "block.raw"), "--shape", "4,4", "--dtype", "nonsense"], 2,
         ["--dtype nonsense"]),
        (["info", npy, "--key", "a"], 2, ["--key applies only"]),
        (["diagram", npy, "--connectivity", "3"], 2, ["connectivity must be 1"]),
        (["compare", str(tmp_path / "labels.npy"), str(tmp_path / "labels.npy"),
          "--min-dice", "0.2"], 2, ["--min-dice must be in (2/3, 1]"]),
    ]


def test_errors_name_the_options_never_python_arguments(tmp_path, capsys):
    for arguments, code, words in _option_cases(tmp_path):
        out = ["-o", str(tmp_path / "out")] if arguments[0] in ("segment", "diagram") else []
        assert main([*arguments, *out]) == code, arguments
        (line,) = _err_lines(capsys.readouterr().err, arguments[0])
        for word in words:
            assert word in line, (arguments, line)
        assert not KEYWORD_ARGUMENT.search(line), line
        assert line.endswith(".")


def test_existing_output_asks_for_the_force_option(tmp_path, capsys):
    np.save(tmp_path / "cells.npy", _cells())
    arguments = ["segment", str(tmp_path / "cells.npy"), "-o", str(tmp_path / "out"), "-q",
                 "--no-report", "--no-thickness"]
    assert main(arguments) == 0
    assert main(arguments) == 4  # README: 4 = output exists without --force
    (line,) = _err_lines(capsys.readouterr().err, "segment")
    assert "use --force to replace it" in line and "force=True" not in line


def test_parameter_file_errors_keep_the_file_s_names(tmp_path, capsys):
    # in a TOML file the key is what the user wrote: it stays as it is
    (tmp_path / "p.toml").write_text("min_volume = -1\n")
    np.save(tmp_path / "cells.npy", _cells())
    assert main(["segment", str(tmp_path / "cells.npy"), "-o", str(tmp_path / "out"),
                 "--params", str(tmp_path / "p.toml")]) == 2
    (line,) = _err_lines(capsys.readouterr().err, "segment")
    assert "p.toml': min_volume must be a number >= 0" in line and "--min-volume" not in line


def _console(*arguments, **options):
    return subprocess.run([CAVITAS, *map(str, arguments)], capture_output=True, text=True,
                          timeout=300, **options)


def test_console_exit_codes_for_input_problems(tmp_path):
    bad = _cells().astype(np.float32)
    bad[5, 5] = np.nan
    np.save(tmp_path / "nan.npy", bad)
    np.save(tmp_path / "good.npy", _cells())
    # README: 3 = an input file holds unusable data (a NaN is the data's fault, not an option's)
    for command in ("segment", "diagram"):
        proc = _console(command, tmp_path / "nan.npy", "-o", tmp_path / command, "-q")
        assert proc.returncode == 3, proc.stderr
        assert "NaN" in _err_lines(proc.stderr, command)[0]
        assert not (tmp_path / command).exists()  # nothing created for a failed read
    # a missing batch input is 3 as well, and the other input still runs
    proc = _console("batch", tmp_path / "good.npy", tmp_path / "gone.tif", "-o",
                    tmp_path / "batch", "--jobs", "1", "-q")
    assert proc.returncode == 3, proc.stderr
    assert "gone.tif' does not exist" in proc.stderr
    rows = (tmp_path / "batch" / "summary.csv").read_text(encoding="utf-8")
    assert rows.count("done") == 1 and rows.count("failed") == 1


def test_readme_exit_codes_and_options_are_the_real_ones():
    import cavitas._errors as errors

    readme = (Path(__file__).parents[1] / "README.md").read_text(encoding="utf-8")
    table = readme.split("## Exit codes", 1)[1].split("\n## ", 1)[0]
    listed = {int(code) for code in re.findall(r"^\| `(\d+)` \|", table, re.MULTILINE)}
    assert listed == {getattr(errors, n) for n in dir(errors) if n.startswith("EXIT_")}
    parser = build_parser()
    known = {o for action in parser._actions for o in action.option_strings}
    for sub in parser._subparsers._group_actions[0].choices.values():
        known |= {o for action in sub._actions for o in action.option_strings}
    named = set(re.findall(r"(?<![\w-])--[a-z][a-z-]*[a-z]", readme))
    assert named <= known, sorted(named - known)


# -- item 7: info past failures, with pipes, on multi-part files -----------------------

def test_info_into_a_closed_pipe_ends_quietly(tmp_path):
    for i in range(150):  # ~100 kB of text: more than a pipe holds, so the writer must wait
        np.save(tmp_path / f"slice{i:03d}.npy", np.full((2, 2), i, np.uint8))
    files = sorted(str(p) for p in tmp_path.glob("*.npy"))
    proc = subprocess.Popen([CAVITAS, "info", *files], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE)
    first = proc.stdout.readline()  # what `| head -1` reads before it goes away
    proc.stdout.close()
    with proc.stderr:
        stderr = proc.stderr.read().decode()
    assert proc.wait(timeout=120) == 141  # 128 + SIGPIPE, as POSIX shells report it
    assert first.decode().strip() == files[0]
    assert stderr == ""  # no "internal error: BrokenPipeError", no "Exception ignored"


def test_info_reports_every_file_past_a_failure(tmp_path, capsys):
    np.save(tmp_path / "a.npy", np.zeros((3, 4), np.uint8))
    np.save(tmp_path / "c.npy", np.ones((5, 6), np.uint8))
    (tmp_path / "b.tif").write_bytes(b"not a tiff at all")
    names = [str(tmp_path / n) for n in ("a.npy", "b.tif", "missing.npy", "c.npy")]
    assert main(["info", "--json", *names]) == 3  # the worst failure: unreadable input
    captured = capsys.readouterr()
    facts = [json.loads(line) for line in captured.out.splitlines()]
    assert [f["shape"] for f in facts] == [[3, 4], [5, 6]]  # numpy's shapes of a and c
    lines = _err_lines(captured.err, "info")
    assert len(lines) == 2 and "b.tif" in lines[0] and "missing.npy" in lines[1]


def test_info_describes_multichannel_time_series_and_multi_array_files(tmp_path, capsys):
    data = np.arange(3 * 4 * 2 * 8 * 9, dtype=np.uint16).reshape(3, 4, 2, 8, 9)
    tifffile.imwrite(tmp_path / "hyper.tif", data, imagej=True, metadata={"axes": "TZCYX"})
    with tifffile.TiffFile(tmp_path / "hyper.tif") as tif:  # tifffile's own reading
        axes, shape = tif.series[0].axes, tif.series[0].shape
    np.savez(tmp_path / "two.npz", first=np.zeros((4, 5)), second=np.ones((6, 7)))
    assert main(["info", "--json", str(tmp_path / "hyper.tif"), str(tmp_path / "two.npz")]) == 0
    tiff, npz = (json.loads(line) for line in capsys.readouterr().out.splitlines())
    assert tiff["holds"] == {"time": list(range(shape[axes.index("T")])),
                             "channel": list(range(shape[axes.index("C")]))}
    assert tiff["shape"] == [shape[axes.index(a)] for a in "ZYX"]
    assert tiff["max"] == int(data[0, :, 0].max())  # time 0, channel 0, by numpy
    assert npz["holds"] == {"key": sorted(np.load(tmp_path / "two.npz").files)}
    assert npz["shape"] == [4, 5]
    assert main(["info", str(tmp_path / "hyper.tif"), "--channel", "1"]) == 0
    text = capsys.readouterr().out
    assert "time points 3: 0 to 2; shown: 0 (--time to choose)" in text
    assert "channels" not in text  # the channel was chosen


# -- item 8: degenerate images get a result or a sentence, never exit 5 -----------------

def _degenerate_images():
    rng = np.random.default_rng(7)
    binary = (_cells() > 100).astype(np.uint8)
    return [  # (name, image, sentence the run summary must hold, or None)
        ("three.npy", rng.integers(0, 255, (3, 3)).astype(np.uint8), "too small"),
        ("one.npy", np.ones((1, 1), np.float32), "too small"),
        ("voxel.npy", np.ones((1, 1, 1), np.uint8), "single slice"),
        ("slice.npy", _cells()[None], "single slice"),
        ("constant.npy", np.full((30, 30), 7, np.uint16), "The image is constant"),
        ("binary.npy", binary, "every cavity has the same persistence"),
        ("half.npy", _cells().astype(np.float16), None),
        ("long.npy", _cells().astype(np.longdouble), None),
    ]


@pytest.mark.parametrize("case", range(len(_degenerate_images())))
def test_degenerate_images_get_a_result_or_a_sentence(tmp_path, capsys, case):
    name, image, sentence = _degenerate_images()[case]
    np.save(tmp_path / name, image)
    out = tmp_path / "out"
    # the report too where the image itself is degenerate (a plot of one value, one voxel)
    report = [] if name in ("three.npy", "one.npy", "slice.npy", "constant.npy") else [
        "--no-report"]
    assert main(["segment", str(tmp_path / name), "-o", str(out), "--no-thickness",
                 *report]) == 0
    captured = capsys.readouterr()
    # nothing on stderr but, on the first run with a new data type, the compile notice
    assert [line for line in captured.err.splitlines() if not line.endswith(COMPILING)] == []
    if sentence:
        assert sentence in captured.out
    for written in ("run.json", "regions.json"):
        _strict_json(out / written)
    if name in ("half.npy", "long.npy"):  # float16 -> float32 is exact (IEEE 754), so
        reference = tmp_path / "reference"  # the labels equal those of the float32 image
        np.save(tmp_path / "f32.npy", image.astype(np.float32))
        assert main(["segment", str(tmp_path / "f32.npy"), "-o", str(reference), "-q",
                     "--no-report", "--no-thickness"]) == 0
        np.testing.assert_array_equal(np.load(out / "labels.npy"),
                                      np.load(reference / "labels.npy"))
        assert _strict_json(out / "run.json")["summary"]["regions"] == 4  # the 4 cells drawn


def test_a_listed_region_with_nothing_labelled_is_listed_blank(tmp_path, capsys):
    # regression: on this 5 x 5 image the only region listed is an enclosure with no
    # chamber left in the label map; measuring nothing raised an IndexError (exit 5)
    np.save(tmp_path / "tiny.npy", np.random.default_rng(1).integers(0, 255, (5, 5))
            .astype(np.uint8))
    assert main(["segment", str(tmp_path / "tiny.npy"), "-o", str(tmp_path / "out"), "-q",
                 "--keep-border", "--no-auto", "--min-persistence", "1", "--no-report"]) == 0
    assert capsys.readouterr().err == ""
    regions = _strict_json(tmp_path / "out" / "regions.json")["columns"]
    assert regions["kind"] == ["enclosure"] and regions["voxel_count"] == [None]


def test_json_is_strict():
    text = dumps({"noise": float("nan"), "limit": np.float32(np.inf), "n": np.int64(3),
                  "shape": (1, 1), "sigma": np.array([0.5, np.nan])})
    assert json.loads(text, parse_constant=pytest.fail) == {
        "noise": None, "limit": None, "n": 3, "shape": [1, 1], "sigma": [0.5, None]}


# -- item 9: no abbreviations; the closest option; no folder before the input is read ----

def test_no_subcommand_takes_abbreviated_options():
    parser = build_parser()
    subcommands = parser._subparsers._group_actions[0].choices
    assert not parser.allow_abbrev
    assert all(not sub.allow_abbrev for sub in subcommands.values())


def test_mistyped_option_names_the_closest_with_the_subcommand_usage(tmp_path, capsys):
    np.save(tmp_path / "cells.npy", _cells())
    out = tmp_path / "out"
    assert main(["segment", str(tmp_path / "cells.npy"), "-o", str(out), "--wall", "dark"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("usage: cavitas segment")
    assert "unknown option --wall (the closest is --walls)" in err
    assert "'dark'" not in err  # the value of the unknown option is not a second complaint
    assert main(["info", str(tmp_path / "cells.npy"), "--jsn"]) == 2
    assert "unknown option --jsn (the closest is --json)" in capsys.readouterr().err
    assert not out.exists()


def test_output_folder_appears_only_after_reading_and_checking(tmp_path, capsys):
    np.save(tmp_path / "cells.npy", _cells())
    for arguments in (["segment", str(tmp_path / "missing.tif")],
                      ["segment", str(tmp_path / "cells.npy"), "--top", "0"],
                      ["segment", str(tmp_path / "cells.npy"), "--min-volume", "3"],
                      ["diagram", str(tmp_path / "missing.tif")],
                      ["batch", str(tmp_path / "missing.tif")]):
        out = tmp_path / "nested" / "out"
        assert main([*arguments, "-o", str(out)]) in (2, 3), arguments
        assert not (tmp_path / "nested").exists(), arguments
    capsys.readouterr()


# -- item 10: quiet Dask, progress labels, errors on their own line ----------------------

@pytest.mark.cluster
def test_dask_local_quiet_prints_nothing(tmp_path):
    pytest.importorskip("distributed")
    np.save(tmp_path / "cells.npy", _cells())
    proc = _console("batch", tmp_path / "cells.npy", "-o", tmp_path / "out", "--dask-local",
                    "--jobs", "1", "-q")
    assert proc.returncode == 0, proc.stderr
    assert proc.stderr == "" and proc.stdout == ""


def test_progress_label_follows_every_stage(tmp_path):
    # a fresh process: the kernels are loaded (or built) under their own label
    write(tmp_path / "cells.tif", _cells())
    script = ("from cavitas.workflow import segment_file; "
              f"segment_file({str(tmp_path / 'cells.tif')!r}, {str(tmp_path / 'out')!r})")
    proc = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True,
                          timeout=300)
    assert proc.returncode == 0, proc.stderr
    # the rate reads "N step/s", or "N s/step" on a slow machine
    labels = re.findall(r"(?:step/s|s/step), ([^\]]+)\]", proc.stderr)
    stages = list(dict.fromkeys(labels))  # in order, each once
    assert stages[:3] == ["reading", "loading kernels (compiled on the first run)",
                          "noise level"]
    assert stages[-3:] == ["measuring", "writing", "report"]


def test_error_starts_on_its_own_line_after_a_progress_bar(tmp_path):
    bad = _cells().astype(np.float32)
    bad[0, 0] = np.nan
    np.save(tmp_path / "nan.npy", bad)
    main_fd, terminal = pty.openpty()  # stderr is a terminal: the progress bar is drawn
    fcntl.ioctl(terminal, termios.TIOCSWINSZ, struct.pack("HHHH", 24, 100, 0, 0))  # 100 wide
    proc = subprocess.Popen([CAVITAS, "segment", str(tmp_path / "nan.npy"), "-o",
                             str(tmp_path / "out")], stderr=terminal, stdout=subprocess.DEVNULL)
    os.close(terminal)
    chunks = []
    while True:
        try:
            chunk = os.read(main_fd, 4096)
        except OSError:  # the terminal closed with the process
            break
        if not chunk:
            break
        chunks.append(chunk)
    os.close(main_fd)
    assert proc.wait(timeout=120) == 3
    shown = b"".join(chunks).decode()
    before = shown.split("cavitas segment: error:")[0]
    assert "step/s, reading]" in before  # a bar was drawn
    assert before.endswith(("\r", "\n")), repr(before[-80:])  # the error starts a line
