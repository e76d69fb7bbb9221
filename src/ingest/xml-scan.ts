// A pass over an XML part's bytes as they are inflated, a piece at a time: it counts the characters of the
// part's text and refuses elements nested deeper than a limit, so a Word file too long or too deep is refused
// while it is unpacked, before the rest of it is inflated, held and converted. Only the counter's state is
// kept between pieces (at most 12 bytes of an unfinished character reference), never the part itself.
//
// What it counts: the text between tags, a character per UTF-8 lead byte, an entity or character reference
// ("&amp;", "&#233;": a ';' at most 12 bytes after the '&', before the next '<') as one character; a stretch
// between two tags that is only whitespace is layout and counts nothing; text after the last tag counts
// nothing. The depth is the count of start tags not yet closed; a quoted attribute value may hold '>' (XML 1.0,
// section 3.1); comments, declarations and processing instructions ("<!", "<?") and empty-element tags ("/>")
// open nothing.
import { LimitExceeded } from './budget.js';

const LT = 0x3c;
const GT = 0x3e;
const SLASH = 0x2f;
const AMP = 0x26;
const SEMI = 0x3b;
const BANG = 0x21;
const QUESTION = 0x3f;
const DQUOTE = 0x22;
const SQUOTE = 0x27;
/** The furthest a reference's ';' may lie after its '&'. */
const REFERENCE_SPAN = 12;

const enum State {
  /** Between tags. */
  Text,
  /** Just after a '<'. */
  TagOpen,
  /** Inside a start tag, a comment, a declaration or a processing instruction. */
  StartTag,
  /** Inside an end tag. */
  EndTag,
}

const isSpace = (c: number): boolean => c === 0x20 || c === 0x09 || c === 0x0a || c === 0x0d;

export class XmlTextCounter {
  private state = State.Text;
  private depth = 0;
  private counted = 0;
  /** The current stretch of text: its characters, and whether all of them were whitespace. */
  private run = 0;
  private blank = true;
  /** In a start tag: the byte after its '<', the quote it is inside (0 when none), and the last byte read. */
  private first = 0;
  private quote = 0;
  private last = 0;
  /** The unfinished end of the previous piece: a '&' and what followed it, up to REFERENCE_SPAN bytes. */
  private carry: Uint8Array | null = null;

  constructor(private readonly maxDepth: number) {}

  /**
   * Characters of text read so far, with the stretch still open (unless it is only whitespace so far): what a
   * limit is checked against while the part is read, so one endless stretch of text is stopped too. It can
   * exceed `finish()` only by text after the last tag, which no well-formed part holds.
   */
  get charsSoFar(): number {
    return this.counted + (this.blank ? 0 : this.run);
  }

  /** Reads the next piece of the part. Throws LimitExceeded once elements nest deeper than `maxDepth`. */
  feed(piece: Uint8Array): void {
    let bytes = piece;
    if (this.carry) {
      bytes = new Uint8Array(this.carry.length + piece.length);
      bytes.set(this.carry);
      bytes.set(piece, this.carry.length);
      this.carry = null;
    }
    const n = bytes.length;
    for (let i = 0; i < n; i++) {
      const c = bytes[i]!;
      switch (this.state) {
        case State.Text:
          if (c === LT) {
            if (!this.blank) this.counted += this.run;
            this.run = 0;
            this.blank = true;
            this.state = State.TagOpen;
          } else if (c === AMP) {
            // A reference is one character: look for its ';' within the span, before the next '<'.
            let end = -1;
            let k = i + 1;
            for (; k < n && k - i <= REFERENCE_SPAN; k++) {
              const d = bytes[k]!;
              if (d === SEMI) {
                end = k;
                break;
              }
              if (d === LT) break;
            }
            if (end === -1 && k === n && k - i <= REFERENCE_SPAN) {
              // The piece ended before the span did: decide with the next piece.
              this.carry = bytes.slice(i);
              return;
            }
            this.blank = false;
            this.run++;
            if (end !== -1) i = end;
          } else if ((c & 0xc0) !== 0x80) {
            if (!isSpace(c)) this.blank = false;
            this.run++;
          }
          break;
        case State.TagOpen:
          if (c === SLASH) {
            this.depth = Math.max(0, this.depth - 1);
            this.state = State.EndTag;
            break;
          }
          this.first = c;
          this.quote = 0;
          this.last = LT;
          this.state = State.StartTag;
          this.startTagByte(c);
          break;
        case State.StartTag:
          this.startTagByte(c);
          break;
        case State.EndTag:
          if (c === GT) this.state = State.Text;
          break;
      }
    }
  }

  /** Ends the part: returns its characters of text. A start tag cut off by the end counts as opened. */
  finish(): number {
    if (this.state === State.TagOpen) {
      this.first = 0;
      this.last = LT;
      this.opened();
    } else if (this.state === State.StartTag) {
      this.opened();
    }
    this.carry = null;
    this.state = State.Text;
    return this.counted;
  }

  private startTagByte(c: number): void {
    if (this.quote) {
      if (c === this.quote) this.quote = 0;
    } else if (c === DQUOTE || c === SQUOTE) {
      this.quote = c;
    } else if (c === GT) {
      this.opened();
      this.state = State.Text;
      return;
    }
    this.last = c;
  }

  private opened(): void {
    if (this.first !== BANG && this.first !== QUESTION && this.last !== SLASH && ++this.depth > this.maxDepth) {
      throw new LimitExceeded('htmlMaxDepth', `the Word file nests elements more than ${this.maxDepth} deep (limits.htmlMaxDepth)`);
    }
  }
}
