"""The epoch display: one rewritten line on a terminal, sparse plain lines elsewhere."""

import io

from shiftbench.progress import LOG_EVERY, EpochProgress


def rows(count):
    return [{"epoch": e, "train_loss": 1.0 / e, "val_accuracy": 0.5} for e in range(1, count + 1)]


def test_live_display_rewrites_one_line_and_ends_it():
    stream = io.StringIO()
    progress = EpochProgress(25, live=True, stream=stream)
    for row in rows(25):
        progress(row)
    progress.close()
    assert stream.getvalue().count("\r") == 25 and stream.getvalue().count("\n") == 1


def test_plain_display_logs_the_first_epoch_and_every_tenth():
    stream = io.StringIO()
    progress = EpochProgress(25, live=False, stream=stream)
    for row in rows(25):
        progress(row)
    progress.close()
    lines = stream.getvalue().splitlines()
    assert [line.split()[1] for line in lines] == ["1/25", f"{LOG_EVERY}/25", f"{2 * LOG_EVERY}/25"]
    assert "\r" not in stream.getvalue()
