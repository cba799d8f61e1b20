"""Argument types shared by the sub-commands: a refusal names the text given and what is allowed."""
from __future__ import annotations

import argparse


def number(text: str) -> float:
    try:
        return float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a number") from None


def whole(text: str) -> int:
    try:
        return int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a whole number") from None


def positive_float(text: str) -> float:
    value = number(text)
    if not (value > 0.0 and value < float("inf")):
        raise argparse.ArgumentTypeError(f"{text!r} must be a number greater than 0")
    return value


def positive_int(text: str) -> int:
    value = whole(text)
    if value < 1:
        raise argparse.ArgumentTypeError(f"{text!r} must be at least 1")
    return value
