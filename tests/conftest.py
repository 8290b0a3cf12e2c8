"""Shared test set-up: one OpenMP thread per process (the engine oversubscribes otherwise)."""

import os

from redoxfront.campaign import (
    THREAD_VARIABLES,  # imports no numpy: set before it loads
)

for _var in THREAD_VARIABLES:
    os.environ.setdefault(_var, "1")
os.environ.setdefault("MPLBACKEND", "Agg")


import pytest  # noqa: E402


@pytest.fixture(scope="session")
def demo_results(tmp_path_factory):
    """The reduced demo campaign, run once for every report test (about 20 s)."""
    from report_campaigns import reduced_demo

    from redoxfront.pipeline import run_campaign

    folder = reduced_demo(tmp_path_factory.mktemp("demo") / "dimethoxybenzene-catholytes")
    run_campaign(folder, progress=False, echo=lambda _line: None)
    return folder


@pytest.fixture(scope="session")
def first_screen_results(tmp_path_factory):
    """A first screen without measurements, run once (a few seconds)."""
    from report_campaigns import first_screen

    from redoxfront.pipeline import run_campaign

    folder = first_screen(tmp_path_factory.mktemp("screen") / "first-screen")
    run_campaign(folder, progress=False, echo=lambda _line: None)
    return folder


@pytest.fixture(scope="session")
def funnel_results(tmp_path_factory):
    """A small library run through the funnel (fast tier, then the full tier), once."""
    from report_campaigns import funnel_library

    from redoxfront.pipeline import run_campaign

    folder = funnel_library(tmp_path_factory.mktemp("funnel") / "funnel-library")
    run_campaign(folder, progress=False, echo=lambda _line: None)
    return folder
