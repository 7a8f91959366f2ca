#!/usr/bin/env python3
"""Opens a summary report (HTML) in headless Chromium and checks that a reader
would see it: every embedded picture decoded (complete, naturalWidth > 0, no
pixel left undecoded) and drawn larger than 100 x 100 CSS pixels, every inline SVG with a real bounding
box, every table and the safety caution visible.

    report_render.py REPORT.html [--images N]

--images N also requires exactly N pictures. Exits 0 when all holds, 1 with one
line per problem (after a line starting "REFUSED") otherwise, 2 when the
browser cannot be started.
"""
import argparse
import pathlib
import sys

from selenium import webdriver
from selenium.common.exceptions import WebDriverException
from selenium.webdriver.chrome.service import Service

CHROMIUM = "/usr/bin/chromium"
CHROMEDRIVER = "/usr/bin/chromedriver"
MIN_SIDE = 100  # CSS pixels

# Everything is measured inside the page, after the load event (all images
# decoded or failed), so that nothing depends on timing.
PROBE = r"""
const visible = (e) => {
  const r = e.getBoundingClientRect();
  const s = getComputedStyle(e);
  return r.width > 0 && r.height > 0 && s.visibility !== 'hidden' &&
         s.display !== 'none' && parseFloat(s.opacity) > 0;
};
// A damaged PNG may still decode in part: Chromium then reports the full size
// and leaves the undecoded rows transparent. The plots are opaque (white
// background), so any transparent pixel means picture data went missing.
const missingPixels = (img) => {
  if (!img.complete || img.naturalWidth <= 0) return null;
  const canvas = document.createElement('canvas');
  canvas.width = img.naturalWidth;
  canvas.height = img.naturalHeight;
  const context = canvas.getContext('2d');
  context.drawImage(img, 0, 0);
  const data = context.getImageData(0, 0, canvas.width, canvas.height).data;
  let missing = 0;
  for (let k = 3; k < data.length; k += 4) if (data[k] === 0) ++missing;
  return missing / (canvas.width * canvas.height);
};
const name = (e, i) => (e.closest('figure') && e.closest('figure').id) || ('#' + i);
return {
  ready: document.readyState,
  images: Array.from(document.images).map((img, i) => ({
    name: name(img, i + 1),
    complete: img.complete,
    naturalWidth: img.naturalWidth,
    naturalHeight: img.naturalHeight,
    width: img.getBoundingClientRect().width,
    height: img.getBoundingClientRect().height,
    external: !img.src.startsWith('data:'),
    missing: missingPixels(img),
  })),
  svgs: Array.from(document.querySelectorAll('svg')).map((svg, i) => {
    let box = null;
    try { const b = svg.getBBox(); box = [b.width, b.height]; } catch (e) {}
    return { name: name(svg, i + 1), box: box,
             width: svg.getBoundingClientRect().width,
             height: svg.getBoundingClientRect().height };
  }),
  tables: Array.from(document.querySelectorAll('table')).map((t, i) => ({
    name: (t.closest('section') && t.closest('section').id) || ('#' + i),
    visible: visible(t), rows: t.rows.length })),
  caution: (() => {
    const c = document.querySelector('.caution');
    return c ? { visible: visible(c), text: c.innerText } : null;
  })(),
  external: Array.from(document.querySelectorAll('[src],link[href],script'))
    .map((e) => e.getAttribute('src') || e.getAttribute('href') || 'script')
    .filter((u) => !u.startsWith('data:')),
};
"""


def browser():
    options = webdriver.ChromeOptions()
    options.binary_location = CHROMIUM
    # As root Chromium refuses to start without --no-sandbox.
    for flag in ("--headless=new", "--no-sandbox", "--disable-gpu",
                 "--disable-dev-shm-usage", "--window-size=1280,1024"):
        options.add_argument(flag)
    return webdriver.Chrome(service=Service(CHROMEDRIVER), options=options)


def problems_in(page, expected_images):
    problems = []
    if page["ready"] != "complete":
        problems.append(f"the page did not finish loading (readyState {page['ready']})")
    images = page["images"]
    if expected_images is not None and len(images) != expected_images:
        problems.append(f"{len(images)} pictures, expected {expected_images}")
    if not images and not page["svgs"]:
        problems.append("no pictures at all")
    for img in images:
        if img["external"]:
            problems.append(f"image {img['name']} is not embedded (not a data: URI)")
        if not img["complete"] or img["naturalWidth"] <= 0 or img["naturalHeight"] <= 0:
            problems.append(f"image {img['name']} did not load (complete={img['complete']}, "
                            f"naturalWidth={img['naturalWidth']})")
        elif img["missing"]:
            problems.append(f"image {img['name']} did not load whole: "
                            f"{100 * img['missing']:.1f} % of its pixels are missing")
        elif img["width"] <= MIN_SIDE or img["height"] <= MIN_SIDE:
            problems.append(f"image {img['name']} is drawn at {img['width']:.0f} x "
                            f"{img['height']:.0f} px, not more than {MIN_SIDE} x {MIN_SIDE}")
    for svg in page["svgs"]:
        if not svg["box"] or svg["box"][0] <= 0 or svg["box"][1] <= 0:
            problems.append(f"svg {svg['name']} has no bounding box ({svg['box']})")
    if not page["tables"]:
        problems.append("no tables")
    for t in page["tables"]:
        if not t["visible"]:
            problems.append(f"table in {t['name']} is not visible")
        elif t["rows"] < 2:
            problems.append(f"table in {t['name']} has {t['rows']} row(s)")
    caution = page["caution"]
    if not caution:
        problems.append("no safety caution (.caution)")
    elif not caution["visible"] or "Caution" not in caution["text"]:
        problems.append("the safety caution is not visible")
    for url in page["external"]:
        problems.append(f"refers to something outside the file: {url[:80]}")
    return problems


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("report", type=pathlib.Path)
    parser.add_argument("--images", type=int, default=None)
    args = parser.parse_args()
    if not args.report.is_file():
        print(f"REFUSED: {args.report}: no such file")
        return 1
    try:
        driver = browser()
    except WebDriverException as e:
        print(f"cannot start headless Chromium ({CHROMIUM}, {CHROMEDRIVER}): {e.msg}",
              file=sys.stderr)
        return 2
    try:
        driver.set_page_load_timeout(60)
        # get() returns after the load event: every image has loaded or failed.
        driver.get(args.report.resolve().as_uri())
        page = driver.execute_script(PROBE)
    finally:
        driver.quit()
    problems = problems_in(page, args.images)
    if problems:
        print(f"REFUSED: {len(problems)} problem(s) in {args.report}")
        for p in problems:
            print(f"  {p}")
        return 1
    sizes = ", ".join(f"{i['name']} {i['naturalWidth']}x{i['naturalHeight']}"
                      for i in page["images"])
    print(f"ok: {args.report}: {len(page['images'])} pictures ({sizes}), "
          f"{len(page['svgs'])} inline svg, {len(page['tables'])} tables, caution visible")
    return 0


if __name__ == "__main__":
    sys.exit(main())
