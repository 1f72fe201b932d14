"""Static files named by their content: a changed file gets a new URL and a new worker
version; under its current hash a file is immutable; an older hash still gets the current
file, only no-cache (a page kept on a tablet from before an update keeps its styles)."""

from __future__ import annotations

import hashlib
import re
import shutil
from pathlib import Path

import pytest

from webapp.web import assets
from webapp.web.pwa import SHELL_PLACEHOLDER, VERSION_PLACEHOLDER, fill_in_worker

IMMUTABLE = "public, max-age=31536000, immutable"


@pytest.fixture
def static_copy(app, tmp_path):
    """The app serving a copy of static/ that a test may change."""
    folder = tmp_path / "static"
    shutil.copytree(app.static_folder, folder)
    app.static_folder = str(folder)
    app.extensions["sparkward_assets"] = assets.ContentHashes(folder)
    return folder


def _asset_urls(client) -> dict[str, str]:
    html = client.get("/login").get_data(as_text=True)
    return {url.split("?")[0]: url
            for url in re.findall(r'(?:href|src)="(/(?:static/|manifest)[^"]+)"', html)}


def _worker(client) -> tuple[str, list[str]]:
    script = client.get("/sw.js").get_data(as_text=True)
    version = re.search(r'^const VERSION = "([0-9a-f]+)";$', script, re.M).group(1)
    shell = re.search(r"^const SHELL_FILES = (\[.*?\]);$", script, re.M | re.S).group(1)
    return version, re.findall(r'"([^"]+)"', shell)


def test_each_url_carries_the_sha256_of_its_file(client, app):
    urls = _asset_urls(client)
    assert set(urls) >= {"/static/css/sparkward.css", "/static/js/outbox.js",
                         "/static/js/sparkward.js", "/static/vendor/htmx-2.0.11.min.js",
                         "/static/icon.svg", "/manifest.webmanifest"}
    for path, url in urls.items():
        name = "manifest.webmanifest" if path == "/manifest.webmanifest" else path[8:]
        data = (Path(app.static_folder) / name).read_bytes()
        assert url == f"{path}?v={hashlib.sha256(data).hexdigest()[:12]}", url
        with client.get(url) as answer:
            assert answer.status_code == 200 and answer.get_data() == data, url
            assert answer.headers["Cache-Control"] == IMMUTABLE, url


def test_a_changed_file_gets_a_new_url_and_a_new_worker(client, static_copy):
    old_urls, (old_version, old_shell) = _asset_urls(client), _worker(client)
    old_css = old_urls["/static/css/sparkward.css"]
    assert old_css in old_shell and old_urls["/static/js/outbox.js"] in old_shell

    css = static_copy / "css" / "sparkward.css"
    css.write_text(css.read_text() + "\n.added-by-the-test { color: #000; }\n")
    new_urls, (new_version, new_shell) = _asset_urls(client), _worker(client)
    new_css = new_urls["/static/css/sparkward.css"]
    assert new_css != old_css
    assert new_version != old_version
    assert new_css in new_shell and old_css not in new_shell
    # Nothing else moved.
    assert {p: u for p, u in new_urls.items() if p != "/static/css/sparkward.css"} == \
        {p: u for p, u in old_urls.items() if p != "/static/css/sparkward.css"}

    with client.get(new_css) as current:
        assert current.headers["Cache-Control"] == IMMUTABLE
        assert b".added-by-the-test" in current.get_data()
    # The old URL: the current file, 200 (a kept page still gets its styles), but not for
    # keeps: it does not name these bytes.
    with client.get(old_css) as older:
        assert older.status_code == 200 and b".added-by-the-test" in older.get_data()
        assert older.headers["Cache-Control"] == "no-cache"
    with client.get("/static/css/sparkward.css") as bare:
        assert bare.headers["Cache-Control"] == "no-cache"


def test_a_file_added_under_static_joins_the_shell(client, static_copy):
    _, before = _worker(client)
    (static_copy / "js" / "tablet_extra.js").write_text("// added by the test\n")
    (static_copy / "css" / "extra.css").write_text("p { margin: 0; }\n")
    version_after, after = _worker(client)
    added = sorted(set(after) - set(before))
    assert [url.split("?")[0] for url in added] == ["/static/css/extra.css",
                                                    "/static/js/tablet_extra.js"]
    for url in added:
        with client.get(url) as answer:
            assert answer.headers["Cache-Control"] == IMMUTABLE
    assert not any(url.startswith("/static/js/sw.js") for url in after)  # not itself


def test_the_worker_keeps_the_whole_shell(client, app):
    version, shell = _worker(client)
    assert re.fullmatch(r"[0-9a-f]{16}", version)
    paths = {url.split("?")[0] for url in shell}
    root = Path(app.static_folder)
    on_disk = {f"/static/{p.relative_to(root).as_posix()}"
               for p in [*root.glob("css/*.css"), *root.glob("js/*.js"),
                         *root.glob("vendor/*.js")]}
    assert paths == (on_disk - {"/static/js/sw.js"}) | {"/static/icon.svg",
                                                         "/manifest.webmanifest"}
    assert {"/static/css/fleet.css", "/static/vendor/htmx-2.0.11.min.js"} <= paths
    assert set(_asset_urls(client).values()) <= set(shell)
    with client.get("/sw.js") as answer:
        assert answer.headers["Cache-Control"] == "no-cache"
        assert answer.headers["Service-Worker-Allowed"] == "/"
        assert answer.mimetype == "text/javascript"


def test_fill_in_worker_refuses_a_file_without_its_placeholders():
    source = f"{VERSION_PLACEHOLDER}\n{SHELL_PLACEHOLDER}\n"
    filled = fill_in_worker(source, "abc", ["/static/x.css?v=1"])
    assert filled == 'const VERSION = "abc";\nconst SHELL_FILES = [\n  "/static/x.css?v=1"\n];\n'
    for broken in (SHELL_PLACEHOLDER, VERSION_PLACEHOLDER, source + SHELL_PLACEHOLDER):
        with pytest.raises(RuntimeError, match="sw.js must hold exactly one"):
            fill_in_worker(broken, "abc", [])


def test_no_hash_for_a_file_outside_static(app):
    hashes = assets.ContentHashes(Path(app.static_folder))
    assert hashes.digest("../pyproject.toml") is None
    assert hashes.digest("css/no-such.css") is None
    assert hashes.digest("css/sparkward.css") is not None
