"""The briefs' worker processes (suitability/reports/workers.py): a failed job is an error naming its file."""

from __future__ import annotations

import pytest

from suitability.errors import OutputError
from suitability.reports.workers import Workers, write_pdf


def test_a_worker_renders_the_pdf_as_this_process_does(tmp_path):
    import pypdf

    html = "<html><body><h1>Invented page</h1><p>Made up for a test.</p></body></html>"
    (tmp_path / "page.html").write_text(html, encoding="utf-8")
    here = write_pdf(html, tmp_path / "here.pdf")
    with Workers(1) as workers:
        assert workers.active
        workers.submit(["pdf", str(tmp_path / "page.html"), str(tmp_path / "there.pdf")])
    texts = [[p.extract_text() for p in pypdf.PdfReader(path).pages] for path in (here, tmp_path / "there.pdf")]
    assert texts[0] == texts[1] and "Invented page" in texts[0][0]


def test_a_failed_job_raises_an_output_error_naming_the_file(tmp_path):
    target = tmp_path / "no_such_folder" / "page.pdf"
    (tmp_path / "page.html").write_text("<p>x</p>", encoding="utf-8")
    with pytest.raises(OutputError, match="page.pdf"):
        with Workers(1) as workers:
            workers.submit(["pdf", str(tmp_path / "page.html"), str(target)])
    assert not target.exists()


def test_no_workers_means_nothing_is_started():
    with Workers(0) as workers:
        assert not workers.active
