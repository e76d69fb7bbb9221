# Reference point for tests/bench/ingest-cranfield.mjs: the Xapian search library's indexer (Debian's
# python3-xapian, xapian.org) on the same folder of text files, one document per file, English stemming,
# committed to an on-disk database. Lexical indexing only: no chunking, no embeddings, no vector index.
#   python3 tests/bench/xapian-index.py <folder> <database folder>
# Prints a JSON line: documents indexed and seconds (reading the files included).
import json
import os
import sys
import time

import xapian

start = time.perf_counter()
folder, target = sys.argv[1], sys.argv[2]
db = xapian.WritableDatabase(target, xapian.DB_CREATE_OR_OVERWRITE)
gen = xapian.TermGenerator()
gen.set_stemmer(xapian.Stem("english"))
n = 0
for name in sorted(os.listdir(folder)):
    with open(os.path.join(folder, name), encoding="utf-8") as f:
        text = f.read()
    doc = xapian.Document()
    gen.set_document(doc)
    gen.index_text(text)
    doc.set_data(name)
    doc.add_boolean_term("Q" + name)
    db.replace_document("Q" + name, doc)
    n += 1
db.commit()
db.close()
print(json.dumps({"documents": n, "seconds": time.perf_counter() - start}))
