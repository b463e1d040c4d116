"""The template's logo: drawn on the record, byte-reproducible, and confined to its folder."""

from __future__ import annotations

import io
import os

import pytest
from PIL import Image
from pypdf import PdfReader

from calib.errors import TemplateError
from calib.report import load_template
from tests.report.conftest import render


def _png(path, size=(60, 20)):
    image = Image.new("RGB", size, (30, 90, 60))
    image.save(path, format="PNG")
    return path


def _template(folder, logo):
    path = folder / "lab.toml"
    path.write_text(f'[lab]\nname = "Kestrel Bioanalytical"\nlogo = "{logo}"\n',
                    encoding="utf-8")
    return path


def test_logo_is_drawn_and_the_pdf_stays_reproducible(tmp_path, nitrate_record):
    _png(tmp_path / "kestrel.png")
    template = load_template(_template(tmp_path, "kestrel.png"))
    assert template.logo == (tmp_path / "kestrel.png").read_bytes()
    pdf = render(nitrate_record, template=template)
    assert render(nitrate_record, template=load_template(_template(tmp_path, "kestrel.png"))) \
        == pdf
    page = PdfReader(io.BytesIO(pdf)).pages[0]
    images = list(page.images)
    assert len(images) == 1 and images[0].image.size == (60, 20)
    # A template with another logo renders other bytes and has another fingerprint.
    _png(tmp_path / "kestrel.png", size=(61, 20))
    other = load_template(_template(tmp_path, "kestrel.png"))
    assert other.fingerprint != template.fingerprint
    assert render(nitrate_record, template=other) != pdf
    assert load_template().logo is None


def test_logo_in_a_subfolder_is_allowed(tmp_path):
    (tmp_path / "images").mkdir()
    _png(tmp_path / "images" / "logo.png")
    assert load_template(_template(tmp_path, "images/logo.png")).logo


@pytest.mark.parametrize(("logo", "message"), [
    ("../outside.png", ("template lab.toml: key 'lab.logo' points outside the template's folder: "
                       "'../outside.png'")),
    ("images/../../outside.png", ("template lab.toml: key 'lab.logo' points outside the "
                                 "template's folder: 'images/../../outside.png'")),
    ("missing.png", "template lab.toml: key 'lab.logo': logo file 'missing.png' not found"),
    ("notes.txt", ("template lab.toml: key 'lab.logo': logo file 'notes.txt' is not a PNG or "
                  "JPEG image")),
    ("broken.png", ("template lab.toml: key 'lab.logo': logo file 'broken.png' is a damaged "
                   "image")),
    (" ", ("template lab.toml: key 'lab.logo' must be a file name inside the template's folder; "
          "got ' '")),
])
def test_bad_logo_paths(tmp_path, logo, message):
    folder = tmp_path / "templates"
    folder.mkdir()
    _png(tmp_path / "outside.png")
    (folder / "images").mkdir()
    (folder / "notes.txt").write_text("not an image")
    (folder / "broken.png").write_bytes(b"\x89PNG\r\n\x1a\n" + b"\x00" * 30)
    with pytest.raises(TemplateError) as info:
        load_template(_template(folder, logo))
    assert str(info.value) == message


def test_absolute_logo_path_is_refused(tmp_path):
    outside = _png(tmp_path / "outside.png")
    folder = tmp_path / "templates"
    folder.mkdir()
    with pytest.raises(TemplateError) as info:
        load_template(_template(folder, outside.as_posix()))
    assert str(info.value) == ("template lab.toml: key 'lab.logo' must be a file name inside the "
                               f"template's folder; got {outside.as_posix()!r}")


@pytest.mark.skipif(os.name != "posix", reason="symbolic links")
def test_symbolic_link_out_of_the_folder_is_refused(tmp_path):
    outside = _png(tmp_path / "outside.png")
    folder = tmp_path / "templates"
    folder.mkdir()
    (folder / "logo.png").symlink_to(outside)
    with pytest.raises(TemplateError) as info:
        load_template(_template(folder, "logo.png"))
    assert str(info.value) == ("template lab.toml: key 'lab.logo' points outside the template's "
                               "folder: 'logo.png'")


def test_logo_too_large_or_not_a_file(tmp_path):
    (tmp_path / "huge.png").write_bytes(b"\x89PNG\r\n\x1a\n" + b"\x00" * 2_000_001)
    with pytest.raises(TemplateError) as info:
        load_template(_template(tmp_path, "huge.png"))
    assert str(info.value) == ("template lab.toml: key 'lab.logo': the logo 'huge.png' is larger "
                               "than 2 MB")
    (tmp_path / "folder.png").mkdir()
    with pytest.raises(TemplateError) as info:
        load_template(_template(tmp_path, "folder.png"))
    assert str(info.value) == ("template lab.toml: key 'lab.logo': logo file 'folder.png' cannot "
                               "be read (Is a directory)")
