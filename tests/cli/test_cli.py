"""The command line's error policy: user mistakes are one line and status 2; defects are logged."""

import subprocess
import sys
import textwrap

from lowdim.cli import main


def test_unknown_method_is_one_line_and_status_2(capsys):
    status = main(["methods", "diffusion_map"])
    err = capsys.readouterr().err
    assert status == 2
    assert err.count("\n") == 1
    assert "unknown method 'diffusion_map' (did you mean 'diffusion_maps'?)" in err


def test_unknown_command_is_status_2():
    proc = subprocess.run(
        [sys.executable, "-m", "lowdim", "sumarise"], capture_output=True, text=True
    )
    assert proc.returncode == 2
    assert "Traceback" not in proc.stderr


def test_missing_plugin_file_is_a_usage_error(capsys, tmp_path):
    status = main(["methods", "--plugin", str(tmp_path / "absent.py")])
    assert status == 2
    assert "absent.py" in capsys.readouterr().err


def test_internal_error_names_a_log_with_the_traceback(capsys, tmp_path):
    plugin = tmp_path / "faulty_plugin.py"
    plugin.write_text(
        textwrap.dedent(
            """
            from lowdim.methods import register_method

            @register_method("faulty_embedding")
            class Faulty:
                def __init__(self):
                    raise RuntimeError("unexpected state")
            """
        )
    )
    status = main(["methods", "faulty_embedding", "--plugin", str(plugin)])
    err = capsys.readouterr().err
    assert status == 1
    assert "internal error (a defect in lowdim" in err
    log_path = err.rsplit("traceback in ", 1)[1].strip()
    with open(log_path) as fh:
        text = fh.read()
    assert "Traceback" in text and "unexpected state" in text
