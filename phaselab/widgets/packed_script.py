"""A script carried compressed: raw DEFLATE (RFC 1951) in base64, unpacked and run in the page.

BokehJS is about 1.3 MB of text and about a quarter of that deflated. A notebook keeps the
library in one output (:mod:`phaselab.widgets.bokehjs`); packed, that output weighs about
0.47 MB. The page unpacks it synchronously (a small inflater below, written for this module
from RFC 1951) and runs the text as an inline script before the next output is drawn, exactly
as the unpacked text would run: a bokeh view made right after finds the library there.
"""

from __future__ import annotations

import base64
import zlib

#: The inflater run in the page: ``__plInflate(bytes, size)`` -> Uint8Array of ``size`` bytes.
#: Canonical Huffman decoding bit by bit (stored, fixed and dynamic blocks).
INFLATE_JS = r"""
function __plInflate(src, size) {
  const out = new Uint8Array(size);
  let pos = 0, buf = 0, cnt = 0, at = 0;
  const bits = (n) => {
    while (cnt < n) { buf |= src[pos++] << cnt; cnt += 8; }
    const v = buf & ((1 << n) - 1);
    buf >>>= n; cnt -= n;
    return v;
  };
  const build = (lengths, n) => {
    const count = new Uint16Array(16), offs = new Uint16Array(16), symbol = new Uint16Array(n);
    for (let s = 0; s < n; s++) count[lengths[s]]++;
    for (let len = 1; len < 15; len++) offs[len + 1] = offs[len] + count[len];
    for (let s = 0; s < n; s++) if (lengths[s]) symbol[offs[lengths[s]]++] = s;
    return {count, symbol};
  };
  const decode = (h) => {
    let code = 0, first = 0, index = 0;
    for (let len = 1; len < 16; len++) {
      code |= bits(1);
      const c = h.count[len];
      if (code - c < first) return h.symbol[index + (code - first)];
      index += c; first = (first + c) << 1; code <<= 1;
    }
    throw new Error("packed script: bad Huffman code");
  };
  const LBASE = [3,4,5,6,7,8,9,10,11,13,15,17,19,23,27,31,35,43,51,59,67,83,99,115,131,163,195,227,258];
  const LEXT = [0,0,0,0,0,0,0,0,1,1,1,1,2,2,2,2,3,3,3,3,4,4,4,4,5,5,5,5,0];
  const DBASE = [1,2,3,4,5,7,9,13,17,25,33,49,65,97,129,193,257,385,513,769,1025,1537,2049,3073,
                 4097,6145,8193,12289,16385,24577];
  const DEXT = [0,0,0,0,1,1,2,2,3,3,4,4,5,5,6,6,7,7,8,8,9,9,10,10,11,11,12,12,13,13];
  const ORDER = [16,17,18,0,8,7,9,6,10,5,11,4,12,3,13,2,14,1,15];
  const codes = (lc, dc) => {
    for (;;) {
      let sym = decode(lc);
      if (sym < 256) { out[at++] = sym; continue; }
      if (sym === 256) return;
      sym -= 257;
      if (sym >= 29) throw new Error("packed script: bad length code");
      const len = LBASE[sym] + bits(LEXT[sym]);
      const ds = decode(dc);
      if (ds >= 30) throw new Error("packed script: bad distance code");
      const dist = DBASE[ds] + bits(DEXT[ds]);
      for (let k = 0; k < len; k++, at++) out[at] = out[at - dist];
    }
  };
  const fixed = () => {
    const l = new Uint8Array(288);
    l.fill(8, 0, 144); l.fill(9, 144, 256); l.fill(7, 256, 280); l.fill(8, 280, 288);
    return [build(l, 288), build(new Uint8Array(30).fill(5), 30)];
  };
  const dynamic = () => {
    const nlen = bits(5) + 257, ndist = bits(5) + 1, ncode = bits(4) + 4;
    const cl = new Uint8Array(19);
    for (let i = 0; i < ncode; i++) cl[ORDER[i]] = bits(3);
    const clc = build(cl, 19);
    const ll = new Uint8Array(nlen + ndist);
    let i = 0;
    while (i < nlen + ndist) {
      const sym = decode(clc);
      if (sym < 16) { ll[i++] = sym; continue; }
      let len = 0, rep;
      if (sym === 16) { len = ll[i - 1]; rep = 3 + bits(2); }
      else if (sym === 17) rep = 3 + bits(3);
      else rep = 11 + bits(7);
      while (rep-- > 0) ll[i++] = len;
    }
    return [build(ll.subarray(0, nlen), nlen), build(ll.subarray(nlen), ndist)];
  };
  let last = 0;
  while (!last) {
    last = bits(1);
    const type = bits(2);
    if (type === 0) {
      buf = 0; cnt = 0;
      const len = src[pos] | (src[pos + 1] << 8);
      pos += 4;
      out.set(src.subarray(pos, pos + len), at);
      pos += len; at += len;
    } else if (type === 1) { const t = fixed(); codes(t[0], t[1]); }
    else if (type === 2) { const t = dynamic(); codes(t[0], t[1]); }
    else throw new Error("packed script: bad block type");
  }
  if (at !== size) throw new Error("packed script: wrong length");
  return out;
}
"""

#: Unpacks the data and runs it as an inline script in the page's head (synchronously).
RUN_JS = """
(function () {
  const text = "%s", size = %d;
  const bin = atob(text);
  const src = new Uint8Array(bin.length);
  for (let i = 0; i < bin.length; i++) src[i] = bin.charCodeAt(i);
  const script = document.createElement("script");
  script.textContent = new TextDecoder().decode(__plInflate(src, size));
  document.head.appendChild(script);
  script.remove();
})();
"""


def deflate(data: bytes) -> bytes:
    """Raw DEFLATE of ``data`` at the strongest level (no zlib header)."""
    packer = zlib.compressobj(9, zlib.DEFLATED, -15, 9)
    return packer.compress(data) + packer.flush()


def packed(script: str) -> str:
    """A script that runs ``script`` (JavaScript text) in the page from its packed form."""
    raw = script.encode("utf-8")
    data = base64.b64encode(deflate(raw)).decode("ascii")
    return INFLATE_JS + RUN_JS % (data, len(raw))
