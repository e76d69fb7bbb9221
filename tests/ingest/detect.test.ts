import { describe, expect, it } from 'vitest';
import { detectFormat } from '../../src/ingest/detect.js';

const enc = (s: string): Uint8Array => new TextEncoder().encode(s);

describe('detectFormat', () => {
  it('recognises the %PDF- magic bytes whatever the extension (ISO 32000-1 §7.5.2 file header)', () => {
    expect(detectFormat(enc('%PDF-1.7\n%\u00e2\u00e3\n1 0 obj'), 'timetable.txt')).toBe('pdf');
    expect(detectFormat(enc('%PDF-1.4'), 'no-extension')).toBe('pdf');
  });

  it('recognises HTML by a leading doctype or html tag, ignoring case, BOM and comments', () => {
    expect(detectFormat(enc('\ufeff<!DOCTYPE html><html></html>'), 'page.txt')).toBe('html');
    expect(detectFormat(enc('  <!-- saved copy -->\n<HTML lang="en">'), 'page')).toBe('html');
    expect(detectFormat(enc('<p>fragment</p>'), 'fragment.md')).toBe('markdown');
  });

  it('detects HTML in UTF-16 text although its bytes contain NULs', () => {
    const bytes = new Uint8Array(Buffer.from('\ufeff<!doctype html><title>x</title>', 'utf16le'));
    expect(detectFormat(bytes, 'page.bin')).toBe('html');
  });

  it('returns null for binary content, even with a text extension', () => {
    expect(detectFormat(new Uint8Array([0x50, 0x4b, 0x03, 0x04, 0x00, 0x14, 0x00]), 'notes.txt')).toBeNull();
    const controls = new Uint8Array(200).map((_, i) => (i % 3 === 0 ? 0x01 : 0x41));
    expect(detectFormat(controls, 'notes.txt')).toBeNull();
  });

  it('falls back to the extension for plain text formats', () => {
    expect(detectFormat(enc('# Fares'), 'fares.md')).toBe('markdown');
    expect(detectFormat(enc('# Fares'), 'FARES.Markdown')).toBe('markdown');
    expect(detectFormat(enc('<div>x</div>'), 'x.htm')).toBe('html');
    expect(detectFormat(enc('Fares'), 'fares.TXT')).toBe('text');
    expect(detectFormat(enc('Fares'), 'fares.text')).toBe('text');
  });

  it('returns null for unsupported extensions and for none', () => {
    expect(detectFormat(enc('a,b\n1,2'), 'fares.csv')).toBeNull();
    expect(detectFormat(enc('Fares'), 'README')).toBeNull();
  });

  it('accepts an empty text file by extension', () => {
    expect(detectFormat(new Uint8Array(), 'empty.txt')).toBe('text');
  });
});
