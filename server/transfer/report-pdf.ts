/**
 * Print a report's HTML to PDF with headless Chromium (Debian's `chromium`, driven by playwright-core).
 * The browser is started per call and closed afterwards: reports are rare, and no browser process is
 * left behind holding memory on a plant server.
 */
import { existsSync } from 'node:fs';
import { chromium } from 'playwright-core';

export class PdfUnavailableError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'PdfUnavailableError';
  }
}

/** The Chromium executable: TIDELINE_CHROMIUM, else Debian's /usr/bin/chromium. Null when absent. */
export function chromiumPath(): string | null {
  const candidates = [process.env.TIDELINE_CHROMIUM, '/usr/bin/chromium', '/usr/bin/chromium-browser'].filter((x): x is string => !!x);
  return candidates.find((p) => existsSync(p)) ?? null;
}

export async function htmlToPdf(html: string, opts: { title?: string } = {}): Promise<Buffer> {
  const exe = chromiumPath();
  if (!exe) {
    throw new PdfUnavailableError('PDF reports need Chromium: install Debian’s chromium package or set TIDELINE_CHROMIUM; the HTML report is available meanwhile');
  }
  const browser = await chromium.launch({
    executablePath: exe,
    headless: true,
    args: ['--no-sandbox', '--disable-gpu', '--disable-background-networking', '--disable-component-update', '--no-first-run', '--disable-sync'],
  });
  try {
    const page = await browser.newPage();
    await page.setContent(html, { waitUntil: 'load' });
    if (opts.title) await page.evaluate((t) => (document.title = t), opts.title);
    return await page.pdf({
      format: 'A4',
      printBackground: true,
      margin: { top: '14mm', bottom: '16mm', left: '12mm', right: '12mm' },
      displayHeaderFooter: true,
      headerTemplate: '<span></span>',
      footerTemplate:
        '<div style="font-size:8px;width:100%;text-align:center;font-family:sans-serif">Tideline batch report · page <span class="pageNumber"></span> of <span class="totalPages"></span></div>',
    });
  } finally {
    await browser.close();
  }
}
