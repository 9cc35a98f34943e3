"""Make the README's pictures of a forecast sheet and a profile sheet.

Refreshes a copy of the ferry sample, has LibreOffice headless export it to PDF (one page per sheet)
and crops the top-left corner of the two sheets with pdftoppm (poppler-utils).

    python docs/make_pictures.py
"""
from __future__ import annotations

import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
PDF_OPTIONS = 'pdf:calc_pdf_Export:{"SinglePageSheets":{"type":"boolean","value":"true"}}'
# (sheet position in the workbook, output name, crop width and height in pixels at DPI)
PICTURES = ((3, "forecast-sheet.png", 1500, 1150), (4, "profile-sheet.png", 1000, 960))
DPI = 150


def main() -> int:
    sys.path.insert(0, str(ROOT))
    from watcher.refresh import workbook as refresh
    with tempfile.TemporaryDirectory() as tmp:
        tmp_path = Path(tmp)
        book = tmp_path / "island_ferry.xlsx"
        shutil.copyfile(ROOT / "sample_workbooks" / "island_ferry.xlsx", book)
        rep = refresh.refresh_workbook(book)
        if not rep.ok:
            print(f"refresh failed: {rep.message}", file=sys.stderr)
            return 1
        subprocess.run(["soffice", f"-env:UserInstallation=file://{tmp_path / 'profile'}", "--headless",
                        "--convert-to", PDF_OPTIONS, "--outdir", str(tmp_path), str(book)],
                       check=True, capture_output=True, timeout=300)
        pdf = tmp_path / "island_ferry.pdf"
        for page, name, width, height in PICTURES:
            stem = tmp_path / f"page{page}"
            crop = ["-x", "0", "-y", "0", "-W", str(width), "-H", str(height)]
            subprocess.run(["pdftoppm", "-r", str(DPI), "-png", "-singlefile", "-f", str(page), "-l",
                            str(page), *crop, str(pdf), str(stem)], check=True, timeout=120)
            shutil.copyfile(stem.with_suffix(".png"), HERE / name)
            print(HERE / name)
    return 0


if __name__ == "__main__":
    sys.exit(main())
