"""Verification against published closed-form solutions, run on the user's installation."""

from .cases import *  # noqa: F401,F403
from .cases import CASES, add_verify_arguments, run_verify_command, verify  # noqa: F401
