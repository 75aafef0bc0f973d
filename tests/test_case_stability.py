"""`heatsoak check` reports an explicit theta's step above the stability limit at time.step."""

from box_case import make_case
from heatsoak.core.app.cli import main
from heatsoak.core.case.casefile import check_case


def _explicit(step):
    def change(d):
        d["time"].update(theta=0.0, step=step, end=10 * step)

    return change


def test_a_forward_euler_step_above_the_limit_is_a_problem_of_time_step(tmp_path, capsys):
    path = make_case(tmp_path, _explicit(10.0))
    issues = check_case(path)
    assert [i.key for i in issues] == ["time.step"]
    assert "stability limit" in issues[0].message and "theta >= 0.5" in issues[0].message
    assert main(["check", str(path)]) == 2
    assert "time.step" in capsys.readouterr().err


def test_a_forward_euler_step_below_the_limit_passes(tmp_path):
    big = check_case(make_case(tmp_path, _explicit(10.0)))[0].message
    limit = float(big.split("stability limit ")[1].split(" s")[0])
    assert check_case(make_case(tmp_path, _explicit(0.5 * limit))) == []
