"""Design-review reports: one self-contained HTML page per run or sweep (images embedded,
style inline, no script, no external address), optionally with a comparison."""

from .compare_section import read_compare
from .model_facts import sha256_of
from .run_report import REPORT_NAME, ReportError, result_report, run_report, write_report
from .sweep_report import is_sweep_folder, sweep_report

__all__ = ["REPORT_NAME", "ReportError", "is_sweep_folder", "read_compare", "report_folder",
           "result_report", "run_report", "sha256_of", "sweep_report", "write_report"]


def report_folder(folder, *, compare=None, model_file=None) -> str:
    """The report page of a folder: a sweep's when it holds ``sweep.csv``, else a run's.

    Parameters
    ----------
    folder : str or Path
        A result folder of ``heat2d run`` or ``heat2d sweep``.
    compare : str or Path, optional
        A compare folder (``compare.json``) to append (run reports only).
    model_file : str or Path, optional
        The model file when the recorded path no longer leads to it.
    """
    if is_sweep_folder(folder):
        if compare is not None:
            raise ReportError("--compare: a comparison goes into a run's report, not a "
                              "sweep's", file=str(folder))
        return sweep_report(folder, model_file=model_file)
    return run_report(folder, compare=None if compare is None else read_compare(compare),
                      model_file=model_file)
