// Builds the two PDF documents of the demo corpus with pdf-lib.
// Usage: node seed-docs/build-pdfs.mjs [outDir]   (default: this folder)
//
// The output must be byte-identical on every run, because the PDFs are committed and a test
// rebuilds them into a temp folder and compares: every date and metadata field is fixed, and
// only the standard (non-embedded) Helvetica fonts are used, so nothing depends on the machine.
// Text is limited to WinAnsi characters, which is all the standard fonts can encode.
import { mkdir, writeFile } from 'node:fs/promises';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import { PDFDocument, StandardFonts, rgb } from 'pdf-lib';

// A5 portrait, a common size for printed handbooks; small pages make a modest text span
// several pages, so page-level citations have something to point at.
const PAGE = { width: 419.53, height: 595.28 };
const MARGIN = { left: 50, right: 50, top: 72, bottom: 70 };
const BODY = { size: 10, leading: 14 };
const HEADING = { 1: { size: 15, before: 10, after: 8 }, 2: { size: 12, before: 10, after: 5 } };
const TABLE = { size: 9, leading: 13 };
// "~" in the source text marks a permitted hyphenation point (drawn as "-" only at a line end).
const SOFT = '~';

const FIXED_DATE = new Date('2026-01-12T09:00:00Z');

/** @typedef {{h1: string} | {h2: string} | {p: string} | {ol: string[]} | {ul: string[]} | {table: {columns: number[], rows: string[][]}} | {pageBreak: true}} Block */

/** @type {{file: string, header: string, code: string, title: string, subject: string, keywords: string[], blocks: Block[]}[]} */
const DOCUMENTS = [
  {
    file: 'staff-handbook.pdf',
    header: 'Marrowgate Valley Transit \u2014 Staff Handbook',
    code: 'MVT-HR-014 Issue 3',
    title: 'Staff Handbook',
    subject: 'Employment policies for all Marrowgate Valley Transit staff',
    keywords: ['staff handbook', 'leave', 'shifts', 'uniform', 'conduct', 'incidents'],
    blocks: [
      { h1: 'Staff Handbook' },
      { p: 'Effective from 1 January 2026.' },
      { p: 'Document code MVT-HR-014, issue 3. Owner: People Team, Marrowgate Valley Transit.' },
      { h2: '1. About this handbook' },
      { p: 'This handbook applies to all employees of Marrowgate Valley Transit, including bus drivers, tram officers, depot staff, Tram Control staff and contact-centre staff.' },
      { p: 'It replaces issue 2 of the Staff Handbook, dated 1 January 2024.' },
      { p: 'Where this handbook and your contract of employment differ, your contract applies.' },
      { p: 'Questions about the handbook should go to your line manager or to the People Team at people@mvt.example.' },
      { p: 'Your line manager is usually your duty supervi~sor; on a shift without a duty supervi~sor on site, the Duty Control manager acts as your line manager.' },
      { h2: '2. Shifts and rostering' },
      { p: 'Rosters are published on the staff portal at least 4 weeks in advance.' },
      { p: 'The standard shift patterns are shown below. Start and finish times can vary by up to 30 minutes on individual duties.' },
      {
        table: {
          columns: [0, 58, 106, 156],
          rows: [
            ['Shift', 'Start', 'Finish', 'Typical roles'],
            ['Early', '05:00', '13:00', 'Drivers, tram officers'],
            ['Middle', '09:00', '17:00', 'Contact centre, depot'],
            ['Late', '13:30', '21:30', 'Drivers, contact centre'],
            ['Night', '21:30', '05:30', 'Depot engineering, Tram Control'],
          ],
        },
      },
      { p: 'Every employee must have a rest period of at least 11 hours between the end of one shift and the start of the next.' },
      { p: 'Drivers must take a break of at least 30 minutes after no more than 5 hours 30 minutes of driving.' },
      { p: 'Shift swaps between colleagues must be approved by the duty supervi~sor at least 48 hours before the first of the swapped shifts.' },
      { p: 'Overtime is voluntary and is paid at time and a half, or at double time on public holidays.' },
      { p: 'The Customer Contact Centre is staffed from 07:00 to 22:00 every day, so contact-centre rosters include early and late shifts at weekends.' },
      { h2: '3. Annual leave' },
      { p: 'Full-time employees receive 30 days of annual leave each year, including 8 public holidays.' },
      { p: 'Part-time employees receive annual leave in proportion to their contracted hours.' },
      { p: 'The leave year runs from 1 April to 31 March.' },
      { p: 'Requests for 5 or more consecutive days of leave must be made at least 4 weeks in advance through the staff portal.' },
      { p: 'Requests for shorter periods of leave should be made at least 7 days in advance and are approved by your duty supervi~sor, subject to cover.' },
      { p: 'Up to 5 days of unused leave can be carried over into the next leave year.' },
      { p: 'No leave is normally approved for operational staff during Marrowgate Valley Show week in August, when extra services run.' },
      { p: 'Employees receive 1 extra day of leave after 5 years of service and 2 extra days after 10 years of service.' },
      { h2: '4. Sickness absence' },
      { p: 'If you cannot come to work because you are ill, call the Duty Control line on 0100 555 0190 at least 2 hours before your shift starts.' },
      { p: 'You can self-certify sickness for up to 7 calendar days; after that, a fit note from a doctor is needed.' },
      { p: 'Your line manager will hold a short return-to-work meeting with you after every period of sickness absence.' },
      { p: 'After the 6-month probation period, employees receive full pay for up to 8 weeks of sickness absence in any 12-month period.' },
      { h2: '5. Uniform and appearance' },
      { p: 'Uniform is issued at no cost to every employee in a customer-facing or operational role.' },
      { p: 'The standard issue is 3 shirts, 2 pairs of trousers or skirts, 1 jacket and 1 high-visibility vest.' },
      { p: 'Replacement uniform items can be ordered once every 12 months, or sooner if an item is damaged at work.' },
      { p: 'Your name badge must be worn at all times while on duty.' },
      { p: 'High-visibility vests must be worn at all times in depots and on the tramway.' },
      { p: 'Uniform must not be worn off duty, except when travelling to and from work.' },
      { h2: '6. Conduct' },
      { p: 'Treat every customer and colleague with courtesy and respect, including when a customer is angry or upset.' },
      { p: 'Drivers must not use a mobile phone while driving a bus or tram, even through a headset or car kit.' },
      { p: 'MVT applies a zero alcohol limit to all safety-critical staff.' },
      { p: 'Safety-critical staff may be asked to take a random drug and alcohol test at any time while on duty.' },
      { p: 'Gifts or hospitality worth more than \u00a325 must be declared to your line manager within 5 working days.' },
      { p: 'Staff must not accept cash tips from customers.' },
      { p: 'Staff must not discuss customers, colleagues or incidents on social media.' },
      { p: 'Breaches of conduct rules are dealt with under the Disciplinary Procedure, which is available on the staff portal.' },
      { h2: '7. Reporting incidents' },
      { p: 'Report every incident, accident or near miss to Duty Control immediately, by radio or on 0100 555 0190.' },
      { p: 'Complete incident report form IR1 within 24 hours of the end of the shift in which the incident happened.' },
      { p: 'An incident includes any assault, threat or abuse towards staff, any injury to a customer or colleague, and any damage to a vehicle or stop.' },
      { p: 'Contact-centre staff who take a call about an incident must record it in the incident log and pass it to Duty Control within 15 minutes.' },
      { p: 'MVT supports staff who want to report an assault to the police, and will give paid time off to attend court.' },
      { p: 'Your duty supervi~sor will check on you before the end of your shift after any incident you report.' },
      { h2: '8. Support for staff' },
      { p: 'The Employee Assistance Programme offers confidential counselling and advice 24 hours a day on 0100 555 0122.' },
      { p: 'Grievances should be raised first with your line manager, and then in writing with the People Team if they are not resolved within 10 working days.' },
      { p: 'Concerns about wrongdoing or danger can be raised in confidence with the Company Secretary at speakup@mvt.example.' },
    ],
  },
  {
    file: 'tram-depot-safety-procedures.pdf',
    header: 'Marrowgate Valley Transit \u2014 Tram and Depot Safety Procedures',
    code: 'MVT-SAF-007 Issue 5',
    title: 'Tram and Depot Safety Procedures',
    subject: 'Safety procedures for Brackenfold Tram Depot and the MVT tramway',
    keywords: ['safety', 'overhead line', 'isolation', 'PPE', 'evacuation', 'depot'],
    blocks: [
      { h1: 'Tram and Depot Safety Procedures' },
      { p: 'Effective from 1 February 2026.' },
      { p: 'Document code MVT-SAF-007, issue 5. Owner: Head of Safety, Marrowgate Valley Transit.' },
      { h2: '1. Purpose and scope' },
      { p: 'These procedures apply to everyone who works at Brackenfold Tram Depot or on the MVT tramway, including contrac~tors and visitors.' },
      { p: 'Everyone entering the depot must sign in at the gatehouse and attend a safety briefing on their first visit.' },
      { p: 'Tram Control at Brackenfold Tram Depot is respon~sible for all tram movements and for the power supply to the overhead line.' },
      { p: 'Any person who believes a task is unsafe has the right to stop work and report it to their supervi~sor without penalty.' },
      { h2: '2. Personal protective equipment' },
      { p: 'Personal protective equipment (PPE) must be worn as shown in the table below.' },
      {
        table: {
          columns: [0, 88, 126, 164, 202, 240],
          rows: [
            ['Area', 'Hi-vis', 'Boots', 'Helmet', 'Eyes', 'Insulated gloves'],
            ['Depot yard', 'Yes', 'Yes', 'No', 'No', 'No'],
            ['Workshop', 'Yes', 'Yes', 'No', 'Yes', 'No'],
            ['Track work', 'Yes', 'Yes', 'Yes', 'Yes', 'No'],
            ['Overhead line', 'Yes', 'Yes', 'Yes', 'Yes', 'Yes'],
          ],
        },
      },
      { p: 'A high-visibility vest and safety boots with toe protection must be worn at all times in the depot yard.' },
      { p: 'Insulated gloves rated for at least 1000 V must be worn for any work on or near the overhead line.' },
      { p: 'A helmet with a chin strap must be worn for track work and overhead line work.' },
      { p: 'Check your PPE before each use and hand damaged items to the depot stores for replace~ment.' },
      { h2: '3. Isolation of the overhead line' },
      { p: 'The overhead line on the MVT tramway carries 750 V DC.' },
      { p: 'Never assume the overhead line is dead until it has been tested and earthed.' },
      { p: 'Only an Authorised Person (Overhead Line) may isolate a section of the overhead line.' },
      { p: 'Anyone who is not working under a permit-to-work must keep at least 2.75 metres away from a live overhead line.' },
      { p: 'The Authorised Person follows these steps, in this order, before any work starts:' },
      {
        ol: [
          'Request the isolation from Tram Control and agree the section to be iso~lated.',
          'Open the section switch and lock it off with a personal padlock.',
          'Attach a danger tag showing your name, the date and the permit number.',
          'Prove the voltage tester on a known live source, test the line for dead, then prove the tester again.',
          'Apply earthing straps on both sides of the work site.',
          'Issue the permit-to-work to the person in charge of the work.',
        ],
      },
      { p: 'Work must not start until the permit-to-work has been signed by both the Authorised Person and the person in charge of the work.' },
      { p: 'Power may be restored only after every permit-to-work for the section has been cancelled and every earthing strap has been removed.' },
      { p: 'Tram Control announces on radio channel 3 before power is restored to a section.' },
      { h2: '4. Moving trams in the depot' },
      { p: 'The speed limit for trams in the depot yard is 10 km/h.' },
      { p: 'The speed limit for trams inside the maintenance shed is 5 km/h.' },
      { p: 'Sound the horn twice before moving a tram in the depot.' },
      { p: 'Trams may be moved in the depot only with the autho~rity of the depot shunter on duty.' },
      { p: 'Nobody may walk between tracks in the maintenance shed while a tram movement is in progress.' },
      { p: 'Blue lights at the shed doors mean that staff are working on a tram and it must not be moved.' },
      { h2: '5. Emergency evacuation' },
      { h2: '5.1 Depot buildings' },
      { p: 'The depot fire alarm is a continuous bell; when it sounds, leave by the nearest exit without stopping to collect belongings.' },
      { p: 'The assembly point for the depot is Assembly Point B, at the staff car park gate.' },
      { p: 'The Depot Duty Manager takes a roll call at the assembly point using the signing-in book.' },
      { p: 'Do not re-enter the buildings until the fire service or the Depot Duty Manager says it is safe.' },
      { h2: '5.2 Evacuating passengers from a stranded tram' },
      { p: 'Passengers must stay on a stranded tram unless Tram Control autho~rises an evacuation.' },
      { p: 'Tram Control authorises an evacuation only after confirming that the overhead line has been isolated and earthed, unless there is an immediate danger such as fire or smoke.' },
      { p: 'Passengers leave by the front door using the detrainment ladder, with a member of staff at the foot of the ladder.' },
      { p: 'Staff lead passengers along the trackside walkway to the nearest stop or place of safety, and count them off the tram and at the destination.' },
      { p: 'In an emergency, contact Tram Control on radio channel 3 or by phone on 0100 555 0111.' },
      { h2: '6. Reporting' },
      { p: 'Report every incident and near miss to Tram Control immediately, and complete incident report form IR1 within 24 hours.' },
      { p: 'Any contact with the overhead line, or any unplanned loss of power, must be reported to the Head of Safety on the same day.' },
      { p: 'These procedures are reviewed every 12 months, or sooner after a serious incident.' },
    ],
  },
];

/** Splits a word at soft-hyphen marks into its possible break points. */
function breakPoints(word) {
  const parts = word.split(SOFT);
  const points = [];
  for (let i = 1; i < parts.length; i++) {
    points.push({ head: parts.slice(0, i).join('') + '-', tail: parts.slice(i).join(SOFT) });
  }
  return points;
}

const plain = (s) => s.split(SOFT).join('');

/** Greedy line wrapping that may break a word at a marked point, as a typesetter would. */
function wrap(text, font, size, width) {
  const words = text.split(/\s+/).filter(Boolean);
  const lines = [];
  let line = '';
  let hyphenated = 0;
  const fits = (s) => font.widthOfTextAtSize(s, size) <= width;
  while (words.length > 0) {
    const word = /** @type {string} */ (words.shift());
    const candidate = line === '' ? plain(word) : `${line} ${plain(word)}`;
    if (fits(candidate)) {
      line = candidate;
      continue;
    }
    // Prefer the longest head that still fits on this line.
    const split = breakPoints(word)
      .reverse()
      .find((bp) => fits(line === '' ? bp.head : `${line} ${bp.head}`));
    if (split) {
      lines.push(line === '' ? split.head : `${line} ${split.head}`);
      hyphenated++;
      line = '';
      words.unshift(split.tail);
      continue;
    }
    if (line === '') throw new Error(`word too wide for the page: ${word}`);
    lines.push(line);
    line = '';
    words.unshift(word);
  }
  if (line !== '') lines.push(line);
  return { lines, hyphenated };
}

/** Lays the blocks out into pages of draw operations; drawing happens once the page count is known. */
function layout(doc, fonts) {
  const width = PAGE.width - MARGIN.left - MARGIN.right;
  const top = PAGE.height - MARGIN.top;
  const pages = [[]];
  let y = top;
  let hyphenated = 0;
  const current = () => /** @type {object[]} */ (pages[pages.length - 1]);
  const newPage = () => {
    pages.push([]);
    y = top;
  };
  const ensure = (height) => {
    if (y - height < MARGIN.bottom) newPage();
  };
  const text = (s, x, size, font) => current().push({ s, x, y, size, font });

  for (const block of doc.blocks) {
    if ('pageBreak' in block) {
      newPage();
    } else if ('h1' in block || 'h2' in block) {
      const level = 'h1' in block ? 1 : 2;
      const style = HEADING[level];
      const content = 'h1' in block ? block.h1 : block.h2;
      const wrapped = wrap(content, fonts.bold, style.size, width);
      // Keep a heading with at least two lines of what follows it.
      ensure(style.before + wrapped.lines.length * (style.size + 4) + 2 * BODY.leading);
      if (y !== top) y -= style.before;
      for (const l of wrapped.lines) {
        y -= style.size;
        text(l, MARGIN.left, style.size, fonts.bold);
        y -= 4;
      }
      y -= style.after;
    } else if ('p' in block) {
      const wrapped = wrap(block.p, fonts.regular, BODY.size, width);
      hyphenated += wrapped.hyphenated;
      for (const l of wrapped.lines) {
        ensure(BODY.leading);
        y -= BODY.leading;
        text(l, MARGIN.left, BODY.size, fonts.regular);
      }
      y -= BODY.leading * 0.45;
    } else if ('ol' in block || 'ul' in block) {
      const items = 'ol' in block ? block.ol : block.ul;
      const indent = 16;
      items.forEach((item, i) => {
        const marker = 'ol' in block ? `${i + 1}.` : '-';
        const wrapped = wrap(item, fonts.regular, BODY.size, width - indent);
        hyphenated += wrapped.hyphenated;
        wrapped.lines.forEach((l, j) => {
          ensure(BODY.leading);
          y -= BODY.leading;
          if (j === 0) text(marker, MARGIN.left, BODY.size, fonts.regular);
          text(l, MARGIN.left + indent, BODY.size, fonts.regular);
        });
        y -= 2;
      });
      y -= BODY.leading * 0.45;
    } else if ('table' in block) {
      const { columns, rows } = block.table;
      ensure(rows.length * TABLE.leading + 6);
      rows.forEach((row, r) => {
        const font = r === 0 ? fonts.bold : fonts.regular;
        y -= TABLE.leading;
        row.forEach((cell, c) => {
          const x = /** @type {number} */ (columns[c]);
          const next = columns[c + 1] ?? width;
          if (font.widthOfTextAtSize(cell, TABLE.size) > next - x - 4) {
            throw new Error(`table cell too wide in ${doc.file}: ${cell}`);
          }
          text(cell, MARGIN.left + x, TABLE.size, font);
        });
        if (r === 0) current().push({ rule: true, y: y - 3 });
      });
      y -= BODY.leading;
    }
  }
  return { pages, hyphenated };
}

async function buildOne(doc) {
  const pdf = await PDFDocument.create({ updateMetadata: false });
  const fonts = {
    regular: await pdf.embedFont(StandardFonts.Helvetica),
    bold: await pdf.embedFont(StandardFonts.HelveticaBold),
  };
  const { pages, hyphenated } = layout(doc, fonts);
  if (hyphenated === 0) {
    // The corpus must exercise de-hyphenation in the PDF loader; fail loudly if edits lose it.
    throw new Error(`${doc.file}: no word was hyphenated across a line end`);
  }
  const grey = rgb(0.35, 0.35, 0.35);
  pages.forEach((ops, i) => {
    const page = pdf.addPage([PAGE.width, PAGE.height]);
    page.drawText(doc.header, { x: MARGIN.left, y: PAGE.height - 36, size: 8, font: fonts.regular, color: grey });
    page.drawLine({
      start: { x: MARGIN.left, y: PAGE.height - 42 },
      end: { x: PAGE.width - MARGIN.right, y: PAGE.height - 42 },
      thickness: 0.5,
      color: grey,
    });
    for (const op of ops) {
      if ('rule' in op) {
        page.drawLine({
          start: { x: MARGIN.left, y: op.y },
          end: { x: PAGE.width - MARGIN.right, y: op.y },
          thickness: 0.4,
        });
      } else {
        page.drawText(op.s, { x: op.x, y: op.y, size: op.size, font: op.font });
      }
    }
    const pageLabel = `Page ${i + 1} of ${pages.length}`;
    const labelWidth = fonts.regular.widthOfTextAtSize(pageLabel, 8);
    page.drawText(doc.code, { x: MARGIN.left, y: 36, size: 8, font: fonts.regular, color: grey });
    page.drawText(pageLabel, { x: PAGE.width - MARGIN.right - labelWidth, y: 36, size: 8, font: fonts.regular, color: grey });
  });

  pdf.setTitle(doc.title);
  pdf.setAuthor('Marrowgate Valley Transit');
  pdf.setSubject(doc.subject);
  pdf.setKeywords(doc.keywords);
  pdf.setCreator('sourcebound seed-docs/build-pdfs.mjs');
  pdf.setProducer('pdf-lib');
  pdf.setLanguage('en-GB');
  pdf.setCreationDate(FIXED_DATE);
  pdf.setModificationDate(FIXED_DATE);
  const bytes = await pdf.save({ useObjectStreams: false });
  return { bytes, pageCount: pages.length, hyphenated };
}

/** Builds every PDF into outDir; returns what was written, for callers and tests. */
export async function buildPdfs(outDir) {
  await mkdir(outDir, { recursive: true });
  const written = [];
  for (const doc of DOCUMENTS) {
    const { bytes, pageCount, hyphenated } = await buildOne(doc);
    const path = join(outDir, doc.file);
    await writeFile(path, bytes);
    written.push({ file: doc.file, path, pageCount, hyphenated, bytes: bytes.length });
  }
  return written;
}

const here = dirname(fileURLToPath(import.meta.url));
if (process.argv[1] && resolve(process.argv[1]) === fileURLToPath(import.meta.url)) {
  const outDir = resolve(process.argv[2] ?? here);
  const written = await buildPdfs(outDir);
  for (const w of written) {
    process.stdout.write(`${w.path}: ${w.pageCount} pages, ${w.hyphenated} hyphenated line end(s), ${w.bytes} bytes\n`);
  }
}
