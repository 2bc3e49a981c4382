"""Independent reading of WordNet's noun files (the WordNet 3.x database format, wndb(5WN)) for test/score/wordnet.test.ts.

Prints, as JSON, the first words of the hypernym chain of a lemma's first sense (following the first hypernym each
step), its depth (longest hypernym path to a root, the root counting 1) and the Wu-Palmer similarity of the first
senses of two lemmas: 2*depth(lcs) / (d_a + d_b + 2*depth(lcs)), lcs the deepest common hypernym, d the shortest
distances to it (Wu & Palmer 1994). Usage: python3 wordnet_reference.py DICT_DIR LEMMA_A LEMMA_B
"""
import functools, json, sys

dict_dir, a, b = sys.argv[1:4]
data = open(f"{dict_dir}/data.noun", "rb").read()

def first_sense(lemma):
    for line in open(f"{dict_dir}/index.noun", encoding="latin-1"):
        f = line.split()
        if f and f[0] == lemma:
            p_cnt = int(f[3])
            return int(f[6 + p_cnt])  # lemma pos synset_cnt p_cnt ptr*p_cnt sense_cnt tagsense_cnt offsets
    raise SystemExit(f"no noun {lemma}")

@functools.lru_cache(None)
def synset(offset):
    end = data.index(b"\n", offset)
    f = data[offset:end].decode("latin-1").split(" | ")[0].split()
    w_cnt = int(f[3], 16)
    words = [f[4 + 2 * i] for i in range(w_cnt)]
    k = 4 + 2 * w_cnt
    p_cnt = int(f[k])
    hypernyms = [int(f[k + 1 + 4 * i + 1]) for i in range(p_cnt) if f[k + 1 + 4 * i] in ("@", "@i")]
    return words, hypernyms

@functools.lru_cache(None)
def depth(offset):
    hs = synset(offset)[1]
    return 1 + max((depth(h) for h in hs), default=0)

def distances(offset):
    out, frontier, d = {offset: 0}, [offset], 0
    while frontier:
        d += 1
        nxt = []
        for s in frontier:
            for h in synset(s)[1]:
                if h not in out:
                    out[h] = d
                    nxt.append(h)
        frontier = nxt
    return out

sa, sb = first_sense(a), first_sense(b)
chain, at = [synset(sa)[0][0]], sa
while synset(at)[1]:
    at = synset(at)[1][0]
    chain.append(synset(at)[0][0])
da, db = distances(sa), distances(sb)
lcs = max(set(da) & set(db), key=lambda s: (depth(s), -(da[s] + db[s])))
wup = 2 * depth(lcs) / (da[lcs] + db[lcs] + 2 * depth(lcs))
print(json.dumps({"chain": chain, "depth": depth(sa), "lcs": synset(lcs)[0][0], "wup": wup}))
