"""service.answer_streams: rows to NDJSON and CSV lines, read back by the standard readers
(Python's json and csv modules stand for any client), and sent chunk by chunk."""
import csv
import io
import json

import numpy as np
from flask import Flask

from uvdose.service import answer_streams
from uvdose.service.answer_streams import NDJSON_MEDIA_TYPE

ROWS = [
    {"id": "a", "dose_j_m2": {"erythema": 1.5, "uva": float("nan")}, "ok": True,
     "uncertainty": {"ozone": {"erythema": 0.02}}},
    {"id": None, "dose_j_m2": {"erythema": 0.0, "uva": 2.25}, "ok": False,
     "uncertainty": {"ozone": {"erythema": 0.03}}},
]


def test_ndjson_lines_read_back_one_row_per_line():
    data = answer_streams.ndjson_lines(ROWS)
    lines = data.decode("utf-8").split("\n")
    assert lines[-1] == "" and len(lines) == len(ROWS) + 1  # every line ends with \n (NDJSON spec)
    back = [json.loads(line) for line in lines[:-1]]
    assert back[0]["dose_j_m2"] == {"erythema": 1.5, "uva": None}  # NaN is null, as in the JSON answers
    assert back[1] == ROWS[1]
    assert answer_streams.ndjson_lines([]) == b""
    assert answer_streams.ndjson_line({"x": np.float64(2.0)}) == b'{"x":2.0}\n'


def test_flat_columns_is_flat_row_column_wise():
    columns = {key: [row[key] for row in ROWS] for key in ROWS[0]}
    flat = answer_streams.flat_columns(columns)
    rows = [answer_streams.flat_row(row) for row in ROWS]
    assert list(flat) == list(rows[0]) == ["id", "dose_j_m2.erythema", "dose_j_m2.uva", "ok",
                                           "uncertainty.ozone.erythema"]
    assert [dict(zip(flat, values)) for values in zip(*flat.values())][1] == rows[1]


def test_flat_columns_fills_a_member_some_objects_lack():
    flat = answer_streams.flat_columns({"m": [{"a": 1}, {"a": 2, "b": 3}, None]})
    assert flat == {"m.a": [1, 2, None], "m.b": [None, 3, None]}


def test_csv_lines_read_back_with_the_header():
    columns = answer_streams.flat_columns({key: [row[key] for row in ROWS] for key in ROWS[0]})
    text = answer_streams.csv_header(list(columns)) + answer_streams.csv_lines(columns)
    back = list(csv.DictReader(io.StringIO(text)))
    assert back[0]["dose_j_m2.uva"] == "" and back[1]["id"] == ""  # NaN and None: empty cells
    assert float(back[1]["dose_j_m2.uva"]) == 2.25
    assert [row["ok"] for row in back] == ["true", "false"]
    rows_text = answer_streams.csv_row_lines(ROWS, list(columns))
    assert rows_text == answer_streams.csv_lines(columns)


def test_csv_lines_follow_the_names_given():
    text = answer_streams.csv_lines({"a": [1, 2], "b": ["x,y", "z"]}, names=["b", "c", "a"])
    assert list(csv.reader(io.StringIO(text))) == [["x,y", "", "1"], ["z", "", "2"]]


def test_streamed_answer_leaves_chunk_by_chunk():
    app = Flask(__name__)
    produced = []

    def chunks():
        for i in range(3):
            produced.append(i)
            yield answer_streams.ndjson_line({"i": i})
        yield ""  # empty chunks are not sent

    @app.get("/s")
    def stream():
        return answer_streams.streamed(chunks(), NDJSON_MEDIA_TYPE)

    response = app.test_client().get("/s", buffered=False)
    assert response.mimetype == NDJSON_MEDIA_TYPE and response.is_streamed
    body = iter(response.response)
    assert next(body) == b'{"i":0}\n' and produced == [0]  # the rest is not computed yet
    assert list(body) == [b'{"i":1}\n', b'{"i":2}\n']
