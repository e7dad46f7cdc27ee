"""The typed per-record errors of models/: what they carry and how they read."""
import numpy as np
import pytest

from uvdose.models.record_errors import RecordError, RecordErrors, check_records


def test_a_record_error_carries_record_field_reason_and_reads_as_one_line():
    error = RecordError(3, "cloud_cover_oktas", "must be a whole number 0–8", value=9.0)
    assert (error.index, error.field, error.reason, error.point) == (3, "cloud_cover_oktas",
                                                                     "must be a whole number 0–8", None)
    assert str(error) == "record 3: cloud_cover_oktas=9 must be a whole number 0–8"
    on_a_point = RecordError(1, "time_unix_s", "must be later than the previous point's", point=4,
                             kind="route")
    assert str(on_a_point) == "route 1, point 4: time_unix_s must be later than the previous point's"
    assert str(RecordError(0, None, "needs at least two points", kind="route")) == (
        "route 0: needs at least two points")
    assert isinstance(error, ValueError)


def test_check_records_names_every_flagged_record_in_order():
    values = np.array([0.5, 2.0, np.nan, 3.0])
    with pytest.raises(RecordErrors, match=r"record 1: cloud_modification_factor=2 .*\(and 2 more\)") as raised:
        check_records(~(values <= 1.5), "cloud_modification_factor", "must be at most 1.5", values)
    assert [e.index for e in raised.value.errors] == [1, 2, 3]
    assert [e.value for e in raised.value.errors][::2] == [2.0, 3.0] and np.isnan(raised.value.errors[1].value)
    check_records(np.zeros(4, bool), "x", "never")  # nothing flagged, nothing raised


def test_per_record_rows_flag_the_record_and_scalars_broadcast():
    with pytest.raises(RecordErrors) as raised:
        check_records(np.array([[False, False], [False, True]]), "ground_albedo", "must be in [0, 1]")
    assert [(e.index, e.value) for e in raised.value.errors] == [(1, None)]
    with pytest.raises(RecordErrors) as raised:
        check_records(np.array([False, True]), "tilt_deg", "must be in [0, 180]", 200.0)
    assert [(e.index, e.value) for e in raised.value.errors] == [(1, 200.0)]


def test_an_empty_list_is_not_an_error():
    with pytest.raises(ValueError, match="at least one"):
        RecordErrors([])
