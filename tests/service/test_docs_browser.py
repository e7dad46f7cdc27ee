"""/docs in a real headless Chromium against the real app under gunicorn, under the
Content-Security-Policy the service sends with the page (service/security_headers.py: nothing
allowed but the service itself; the server fixture checks the header is there).

What a reader of the page must get: every operation and every schema field of the
contract (compared with openapi.yaml itself), the example forms sending a request (the
example, and an edited copy) and showing the 200 answer, the page whole with scripts off
(examples and pictures included), the pictures rendered with their labels, labelled
controls, keyboard use and readable contrast. Screenshots are kept as test artefacts
(tests/service/browser.py).
"""
from __future__ import annotations

import re
import urllib.request

import pytest

from tests.service.browser import Artefacts, start_chromium, stop_chromium
from tests.service.conftest import running_gunicorn
from tests.service.contract_examples import operations
from tests.service.test_edge_policies import STRICT_DOCS_POLICY

pytestmark = pytest.mark.browser

SCHEMA_KEYS = ("allOf", "oneOf", "anyOf")


@pytest.fixture(scope="module")
def server(tmp_path_factory):
    with running_gunicorn(tmp_path_factory, UVDOSE_CACHE="memory") as base_url:
        with urllib.request.urlopen(base_url + "/docs", timeout=10) as reply:
            assert reply.headers["Content-Security-Policy"] == STRICT_DOCS_POLICY
        yield base_url


@pytest.fixture(scope="module")
def artefacts(tmp_path_factory):
    return Artefacts(tmp_path_factory.mktemp("browser-artefacts"))


@pytest.fixture(scope="module")
def browser():
    driver = start_chromium()
    yield driver
    stop_chromium(driver)


@pytest.fixture(scope="module")
def page(browser, server):
    browser.get(server + "/docs")
    return browser


def _wait(browser, condition, timeout=30):
    from selenium.webdriver.support.ui import WebDriverWait

    return WebDriverWait(browser, timeout).until(condition)


# -- what the contract says the page must show (walked here, independently of the page) ----

def _resolve(spec, schema, seen):
    if isinstance(schema, dict) and "$ref" in schema:
        name = schema["$ref"].rsplit("/", 1)[-1]
        if name in seen:
            return None, seen
        return spec["components"]["schemas"][name], seen + (name,)
    return schema, seen


def _structured(schema) -> bool:
    return bool(schema.get("properties")) or any(k in schema for k in SCHEMA_KEYS) \
        or isinstance(schema.get("additionalProperties"), dict)


def expected_fields(spec, schema, prefix="", seen=()) -> set[str]:
    """Every field path of a schema: members, members of members (through $ref), array items
    (``a[]``), map members (``a.{key}``), with allOf/oneOf/anyOf parts merged in."""
    schema, seen = _resolve(spec, schema, seen)
    if schema is None:
        return set()
    found = set()
    for key in SCHEMA_KEYS:
        for part in schema.get(key, ()):
            found |= expected_fields(spec, part, prefix, seen)
    members = dict(schema.get("properties") or {})
    if isinstance(schema.get("additionalProperties"), dict):
        members["{key}"] = schema["additionalProperties"]
    for name, sub in members.items():
        path = f"{prefix}.{name}" if prefix else name
        found.add(path)
        inner, inner_seen = _resolve(spec, sub, seen)
        if inner is None:
            continue
        if _structured(inner):
            found |= expected_fields(spec, inner, path, inner_seen)
        if "array" in (inner.get("type") if isinstance(inner.get("type"), list) else [inner.get("type")]):
            items, item_seen = _resolve(spec, inner.get("items", {}), inner_seen)
            if items is not None and _structured(items):
                found |= expected_fields(spec, items, path + "[]", item_seen)
    return found


def _parameter(spec, parameter):
    if "$ref" in parameter:
        return spec["components"]["parameters"][parameter["$ref"].rsplit("/", 1)[-1]]
    return parameter


# -- the tests --------------------------------------------------------------------------

def test_the_page_shows_every_operation_parameter_and_schema_field(page, openapi_spec, artefacts):
    artefacts.screenshot(page, "docs-top")
    shown = page.execute_script("""
        const out = {operations: {}, schemas: {}};
        document.querySelectorAll('section.operation').forEach(s => {
          const r = s.getBoundingClientRect();
          out.operations[s.dataset.operationId] = {
            visible: r.width > 0 && r.height > 0,
            params: [...s.querySelectorAll('tr[data-param]')].map(t => t.dataset.param)};
        });
        document.querySelectorAll('section.schema').forEach(s => {
          out.schemas[s.dataset.schema] = [...s.querySelectorAll('tr[data-field]')]
            .filter(t => t.getBoundingClientRect().height > 0).map(t => t.dataset.field);
        });
        return out;""")
    contract_ops = {op["operationId"]: op for _, _, op in operations(openapi_spec)}
    assert set(shown["operations"]) == set(contract_ops)
    for op_id, op in contract_ops.items():
        assert shown["operations"][op_id]["visible"], op_id
        names = [_parameter(openapi_spec, p)["name"] for p in op.get("parameters", ())]
        assert sorted(shown["operations"][op_id]["params"]) == sorted(names), op_id
    schemas = openapi_spec["components"]["schemas"]
    assert set(shown["schemas"]) == set(schemas)
    for name, schema in schemas.items():
        assert set(shown["schemas"][name]) == expected_fields(openapi_spec, schema, seen=(name,)), name
    # The compositions the old page hid: the dose requests' records and options, expanded.
    window = set(shown["schemas"]["WindowDosesRequest"])
    assert {"records", "records[].start", "records[].lat", "spectra", "step_s", "glazing"} <= window
    assert {"routes", "parked_dose", "driver_side"} <= set(shown["schemas"]["RouteDosesRequest"])
    units = page.execute_script(
        "return [...document.querySelectorAll('#schema-WindowRecord tr[data-field]')]"
        ".map(t => [t.dataset.field, t.cells[2].textContent])")
    assert ["lat", "degrees north"] in units and ["elevation_m", "metres"] in units


def test_the_contents_problem_types_and_cautions_are_there(page, openapi_spec):
    from selenium.webdriver.common.by import By

    links = {a.get_attribute("hash") for a in page.find_elements(By.CSS_SELECTOR, "#contents a")}
    ops = {f"#op-{op['operationId']}" for _, _, op in operations(openapi_spec)}
    assert ops | {"#introduction", "#cautions", "#pictures", "#problems", "#operations", "#schemas"} <= links
    problems = [row.get_attribute("data-problem") for row in page.find_elements(By.CSS_SELECTOR, "tr[data-problem]")]
    assert "urn:uvdose:problem:invalid-records" in problems and "about:blank" in problems
    assert "Uvdose-Caution" in page.find_element(By.ID, "cautions").text
    # Backticks in descriptions are code, not raw marks.
    intro = page.find_element(By.ID, "introduction")
    assert "`" not in intro.text and intro.find_elements(By.TAG_NAME, "code")


def test_the_example_form_sends_the_example_and_an_edited_copy(page, artefacts):
    from selenium.webdriver.common.by import By
    from selenium.webdriver.common.keys import Keys

    form = page.find_element(By.ID, "try-computeIrradiance-0")
    page.execute_script("arguments[0].scrollIntoView()", form)
    button = form.find_element(By.CSS_SELECTOR, "button[type=submit]")
    assert button.is_displayed()
    button.send_keys(Keys.ENTER)  # the keyboard, not a mouse
    status = form.find_element(By.CSS_SELECTOR, ".answer-status")
    _wait(page, lambda _: status.text.startswith("200"))
    body = form.find_element(By.CSS_SELECTOR, ".answer-body").text
    assert '"uv_index"' in body and "combe-basse/block-b" in body
    assert "not a measurement" in form.find_element(By.CSS_SELECTOR, ".answer-caution").text
    artefacts.screenshot(page, "docs-try-irradiance-200")

    textarea = form.find_element(By.TAG_NAME, "textarea")
    edited = textarea.get_attribute("value").replace('"combe-basse/block-b"', '"combe-basse/edited"', 1)
    page.execute_script("arguments[0].value = arguments[1]", textarea, edited)
    accept = form.find_element(By.CSS_SELECTOR, "select[data-accept]")
    page.execute_script("arguments[0].value = 'text/csv'", accept)
    button.click()
    _wait(page, lambda _: "text/csv" in status.text)
    assert status.text.startswith("200")
    answer = form.find_element(By.CSS_SELECTOR, ".answer-body").text
    assert answer.splitlines()[0].endswith(",caution") and "combe-basse/edited" in answer


def test_every_example_form_gets_a_200(page):
    from selenium.webdriver.common.by import By

    forms = page.find_elements(By.CSS_SELECTOR, "form.try")
    assert len(forms) >= 12
    for form in forms:
        status = form.find_element(By.CSS_SELECTOR, ".answer-status")
        page.execute_script("arguments[0].requestSubmit()", form)
        _wait(page, lambda _: status.text[:3].isdigit(), timeout=60)
        accepted = "202" if form.get_attribute("id").endswith("Job-0") else "200"  # a job submitted
        assert status.text.startswith(accepted), (form.get_attribute("id"), status.text)


def test_the_picture_forms_show_the_picture_on_the_page(page, artefacts):
    from selenium.webdriver.common.by import By

    form = page.find_element(By.ID, "try-drawUvIndexDay-0")
    page.execute_script("arguments[0].scrollIntoView()", form)
    form.find_element(By.NAME, "utc_offset").clear()
    form.find_element(By.NAME, "utc_offset").send_keys("+01:00")
    form.find_element(By.CSS_SELECTOR, "button[type=submit]").click()
    _wait(page, lambda _: form.find_elements(By.CSS_SELECTOR, ".answer-picture svg"))
    labels = [t.text for t in form.find_elements(By.CSS_SELECTOR, ".answer-picture svg text.x-label")]
    assert labels == ["Local time (UTC+01:00), every 10 minutes"]
    page.execute_script("arguments[0].scrollIntoView()", form.find_element(By.CSS_SELECTOR, ".answer"))
    artefacts.screenshot(page, "docs-try-uv-day-picture")


def test_the_pictures_render_with_their_labels(page, server, artefacts):
    from selenium.webdriver.common.by import By

    images = page.execute_script(
        "return [...document.querySelectorAll('#pictures img')].map(i => [i.getAttribute('src'), i.naturalWidth, i.alt])")
    assert len(images) == 2 and all(width == 800 and alt for _, width, alt in images)
    for number, (src, _, _) in enumerate(images):
        page.get(server + src)
        texts = {t.get_attribute("class"): t for t in page.find_elements(By.CSS_SELECTOR, "text")}
        for css_class in ("picture-title", "axis-label x-label", "axis-label y-label"):
            label = texts[css_class]
            assert label.text and max(label.size["width"], label.size["height"]) > 20, css_class  # drawn, not empty
        caution = page.find_elements(By.CSS_SELECTOR, "text.caution-text")
        assert caution and all(line.size["width"] > 50 for line in caution)
        artefacts.screenshot(page, f"picture-{number}-{re.sub(r'[^a-z]+', '-', src.split('?')[0])}")
    page.get(server + "/docs")


def test_controls_are_labelled_usable_by_keyboard_and_readable(page):
    from selenium.webdriver.common.by import By
    from selenium.webdriver.common.keys import Keys

    unlabelled = page.execute_script(
        "return [...document.querySelectorAll('input:not([type=hidden]), select, textarea')]"
        ".filter(c => !c.labels || c.labels.length === 0).map(c => c.id || c.name)")
    assert unlabelled == []
    page.get(page.current_url.split("#")[0])
    page.find_element(By.TAG_NAME, "body").send_keys(Keys.TAB)
    skip = page.switch_to.active_element
    assert skip.get_attribute("class") == "skip" and skip.is_displayed()
    skip.send_keys(Keys.ENTER)
    assert page.switch_to.active_element.get_attribute("id") == "main"
    ratios = page.execute_script("""
        function rgb(text) { return text.match(/[\\d.]+/g).slice(0, 3).map(Number); }
        function lum(c) { const v = c.map(x => { x /= 255; return x <= 0.03928 ? x / 12.92 : Math.pow((x + 0.055) / 1.055, 2.4); });
                          return 0.2126 * v[0] + 0.7152 * v[1] + 0.0722 * v[2]; }
        function ratio(a, b) { const [x, y] = [lum(rgb(a)), lum(rgb(b))].sort((p, q) => q - p); return (x + 0.05) / (y + 0.05); }
        function pair(selector) { const e = document.querySelector(selector); let b = e, bg;
          while (b) { bg = getComputedStyle(b).backgroundColor; if (!/rgba\\(.*, 0\\)/.test(bg) && bg !== 'transparent') break; b = b.parentElement; }
          return ratio(getComputedStyle(e).color, bg); }
        return {body: pair('main p'), link: pair('#contents a'), button: pair('form.try button'),
                caution: pair('.caution-box p'), table: pair('table.fields td')};""")
    assert all(value >= 4.5 for value in ratios.values()), ratios


def test_the_page_breaks_no_content_security_policy_rule(page):
    messages = [entry["message"] for entry in page.get_log("browser")]
    refused = [m for m in messages if "Content Security Policy" in m or "Refused to" in m]
    assert refused == []


def test_with_scripts_off_the_page_is_whole(server, openapi_spec, artefacts):
    from selenium.webdriver.common.by import By

    browser = start_chromium(scripts=False)
    try:
        browser.get(server + "/docs")
        scripted = browser.execute_script("return document.documentElement.classList.contains('scripted')")
        assert scripted is False  # the page's own script did not run
        examples = browser.find_elements(By.CSS_SELECTOR, "pre.example-body")
        assert len(examples) >= 7 and all(e.text.strip().startswith(("{", "id,")) for e in examples)
        assert "combe-basse/block-b" in browser.find_element(By.ID, "op-computeIrradiance").text
        assert "curl -s" in browser.find_element(By.ID, "op-computeRouteDoses").text
        note = browser.find_element(By.CSS_SELECTOR, "#op-computeIrradiance .noscript-note")
        assert note.is_displayed() and not browser.find_element(
            By.CSS_SELECTOR, "#op-computeIrradiance form.try button").is_displayed()
        widths = browser.execute_script("return [...document.querySelectorAll('#pictures img')].map(i => i.naturalWidth)")
        assert widths == [800, 800]
        rows = browser.find_elements(By.CSS_SELECTOR, "#schema-FieldDosesRequest tr[data-field]")
        assert {"daily.cloud_oktas", "first_day", "records[].lat"} <= {r.get_attribute("data-field") for r in rows}
        artefacts.screenshot(browser, "docs-scripts-off")
        # A GET form works without scripts: the browser itself goes to the picture.
        form = browser.find_element(By.ID, "try-drawFieldSeason-0")
        browser.execute_script("arguments[0].scrollIntoView()", form)
        form.find_element(By.CSS_SELECTOR, "button[type=submit]").click()
        _wait(browser, lambda b: "/v1/pictures/field-season?" in b.current_url)
        artefacts.screenshot(browser, "picture-season-scripts-off")
        _wait(browser, lambda b: b.find_elements(By.CSS_SELECTOR, "text.y2-label"))
    finally:
        stop_chromium(browser)
