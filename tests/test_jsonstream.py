"""The streaming JSON writer gives exactly the text of the standard library's encoder
(json.dumps(doc, indent=1, ensure_ascii=False, default=str)), which it replaces for range summaries."""

from __future__ import annotations

import io
import json
from pathlib import Path

from hypothesis import given
from hypothesis import strategies as st

from labelcalc.outputs.jsonstream import Lazy, encode, write_document

scalars = st.one_of(
    st.none(),
    st.booleans(),
    st.integers(),
    st.floats(allow_nan=True, allow_infinity=True),
    st.text(),
)
values = st.recursive(
    scalars,
    lambda inner: st.one_of(
        st.lists(inner, max_size=4),
        st.tuples(inner, inner),
        st.dictionaries(st.text(max_size=5), inner, max_size=4),
    ),
    max_leaves=20,
)


def _reference(doc) -> str:
    return json.dumps(doc, indent=1, ensure_ascii=False, default=str)


@given(values)
def test_encode_matches_the_standard_library(v):
    assert encode(v) == _reference(v)


@given(st.dictionaries(st.text(max_size=5), values, max_size=5), st.lists(st.dictionaries(st.text(), scalars)))
def test_document_with_a_streamed_list_matches(head, rows):
    head.pop("summary", None)
    fh = io.StringIO()
    write_document(fh, [*head.items(), ("summary", Lazy(iter(rows)))])
    assert fh.getvalue() == _reference({**head, "summary": rows})


def test_objects_json_cannot_encode_are_written_as_their_text():
    doc = {"file": Path("a/b.yaml"), "keys": {1: "x"}, "nested": [{"p": Path("c")}]}
    assert encode(doc) == _reference(doc)
    fh = io.StringIO()
    write_document(fh, list(doc.items()))
    assert fh.getvalue() == _reference(doc)


def test_empty_document_and_empty_stream():
    fh = io.StringIO()
    write_document(fh, [])
    assert fh.getvalue() == "{}"
    fh = io.StringIO()
    write_document(fh, [("summary", Lazy([])), ("errors", [])])
    assert fh.getvalue() == _reference({"summary": [], "errors": []})
