#!/usr/bin/env python3
"""Generates proxy/Cache/Resources/senses.tsv.gz, the word senses the hit decision reads substitutions with.

Source: WordNet 3.0 (Debian package `wordnet-base`, /usr/share/wordnet): data.{noun,verb,adj,adv} and the
exception lists {noun,verb,adj,adv}.exc. What the decision needs from it, and nothing else:
  w <TAB> word <TAB> synset ids      every sense of a word (single words and compounds of up to three words,
                                    lower-cased, '_' as a space), from index.{noun,verb,adj,adv}: four groups
                                    separated by ';' (noun, verb, adjective, adverb), each in WordNet's sense order
                                    (most frequent first); ids are small integers in base 36, numbered in data-file
                                    order. Two words that share an id are synonyms in that sense.
  h <TAB> synset id <TAB> ids       the synset's direct hypernyms ('@' and '@i' pointers): "fee" is a kind of "charge".
  d <TAB> word <TAB> word           derivationally related forms (WordNet's lexical '+' pointer):
                                    "reimburse" / "reimbursement", "approve" / "approval". Only direct links:
                                    "employee" and "employer" both derive from "employ", but not from each other.
  x <TAB> inflected <TAB> base      irregular forms from the exception lists ("paid" -> "pay").
Satellite adjectives count as adjectives. Adjective position markers ("(a)", "(p)", "(ip)") are dropped.

Usage: scripts/wordnet-senses.py [--wordnet DIR] [--out FILE.gz]
"""
import argparse
import gzip
import os
import re
import sys

FILES = {"n": "data.noun", "v": "data.verb", "a": "data.adj", "r": "data.adv"}
EXCEPTIONS = {"n": "noun.exc", "v": "verb.exc", "a": "adj.exc", "r": "adv.exc"}
MARKER = re.compile(r"\((a|p|ip)\)$")
WORD = re.compile(r"^[a-z][a-z'-]*(?: [a-z][a-z'-]*){0,2}$")


def b36(n):
    digits = "0123456789abcdefghijklmnopqrstuvwxyz"
    out = ""
    while True:
        n, r = divmod(n, 36)
        out = digits[r] + out
        if n == 0:
            return out


def parse(path):
    with open(path, encoding="latin-1") as f:
        for line in f:
            if line.startswith("  "):
                continue
            fields = line.split(" | ", 1)[0].split()
            offset = fields[0]
            count = int(fields[3], 16)
            words = [MARKER.sub("", fields[4 + 2 * i]).lower().replace("_", " ") for i in range(count)]
            i = 4 + 2 * count
            pointer_count = int(fields[i])
            i += 1
            pointers = []
            for _ in range(pointer_count):
                symbol, target, pos, source_target = fields[i:i + 4]
                i += 4
                if symbol in ("+", "@", "@i"):
                    pointers.append((symbol, target, pos, int(source_target[:2], 16), int(source_target[2:], 16)))
            yield offset, words, pointers


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--wordnet", default="/usr/share/wordnet")
    parser.add_argument("--out")
    args = parser.parse_args()

    synsets = {}
    order = []
    for pos, name in FILES.items():
        path = os.path.join(args.wordnet, name)
        if not os.path.exists(path):
            sys.exit(f"{path} not found: install WordNet 3.0 (apt-get install wordnet-base)")
        for offset, words, pointers in parse(path):
            key = (pos, offset)
            synsets[key] = (words, pointers)
            order.append(key)
    ids = {key: i for i, key in enumerate(order)}

    senses = {}
    for group, pos in enumerate("nvar"):
        with open(os.path.join(args.wordnet, "index." + {"n": "noun", "v": "verb", "a": "adj", "r": "adv"}[pos]), encoding="latin-1") as f:
            for line in f:
                if line.startswith("  "):
                    continue
                fields = line.split()
                lemma = fields[0].replace("_", " ")
                if not WORD.match(lemma):
                    continue
                synset_count = int(fields[2])
                offsets = fields[-synset_count:]
                senses.setdefault(lemma, [[], [], [], []])[group] = [ids[(pos, o)] for o in offsets]

    derived = set()
    hypernyms = {}
    for key in order:
        words, pointers = synsets[key]
        for symbol, target, target_pos, source, target_word in pointers:
            target_pos = "a" if target_pos == "s" else target_pos
            if symbol != "+":
                hypernyms.setdefault(ids[key], []).append(ids[(target_pos, target)])
                continue
            left = words[source - 1]
            right = synsets[(target_pos, target)][0][target_word - 1]
            if left != right and WORD.match(left) and WORD.match(right):
                derived.add(tuple(sorted((left, right))))

    irregular = set()
    for pos, name in EXCEPTIONS.items():
        with open(os.path.join(args.wordnet, name), encoding="latin-1") as f:
            for line in f:
                inflected, *bases = line.split()
                for base in bases:
                    if inflected.isalpha() and base.replace("_", " ") in senses:
                        irregular.add((inflected, base.replace("_", " ")))

    lines = ["# Word senses from WordNet 3.0 (Princeton University), generated by scripts/wordnet-senses.py.",
             "# Licence: antonyms.LICENSE beside this file (the WordNet 3.0 licence). Columns: see the script."]
    lines += [f"w\t{w}\t{';'.join(' '.join(b36(i) for i in g) for g in groups)}" for w, groups in sorted(senses.items())]
    lines += [f"h\t{b36(i)}\t{' '.join(b36(h) for h in hs)}" for i, hs in sorted(hypernyms.items())]
    lines += [f"d\t{a}\t{b}" for a, b in sorted(derived)]
    lines += [f"x\t{a}\t{b}" for a, b in sorted(irregular)]
    data = ("\n".join(lines) + "\n").encode("utf-8")
    if args.out:
        # mtime 0: the same WordNet gives the same bytes, so the committed file can be checked against a regeneration.
        with open(args.out, "wb") as f:
            with gzip.GzipFile(fileobj=f, mode="wb", mtime=0, filename="") as z:
                z.write(data)
    else:
        sys.stdout.buffer.write(data)


if __name__ == "__main__":
    main()
