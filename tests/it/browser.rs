//! The report opens in a real browser: headless Chromium from the distribution
//! loads report/index.html with no console errors, and its screenshot is not
//! blank. Skipped loudly when Chromium is not installed (tests/setup/packages.sh
//! installs it as root).

use crate::report_fixture as fixture;

use std::path::{Path, PathBuf};
use std::process::Command;

fn chromium() -> Option<PathBuf> {
    ["/usr/bin/chromium", "/usr/bin/chromium-browser"]
        .iter()
        .map(PathBuf::from)
        .find(|p| p.exists())
}

/// Loads `page` in headless Chromium with a fresh profile, saves a screenshot at
/// `png`, and returns Chromium's log (stderr).
fn load(chrome: &Path, page: &Path, png: &Path, profile: &Path) -> String {
    let out = Command::new(chrome)
        .args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--disable-quic",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            "--hide-scrollbars",
            "--enable-logging=stderr",
            "--v=0",
            "--window-size=1280,2200",
        ])
        .arg(format!("--user-data-dir={}", profile.display()))
        .arg(format!("--screenshot={}", png.display()))
        .arg(format!("file://{}", page.display()))
        .output()
        .expect("run chromium");
    assert!(
        out.status.success(),
        "chromium failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8_lossy(&out.stderr).into_owned()
}

/// Lines of Chromium's log that report a page console message or a failed load.
/// (Browser-internal noise such as D-Bus or GPU messages is not the page's and
/// is ignored; a failed resource load of the page is logged as CONSOLE.)
fn console_errors(log: &str) -> Vec<&str> {
    log.lines()
        .filter(|l| {
            l.contains("CONSOLE") || l.contains("Uncaught") || l.contains("Failed to load resource")
        })
        .collect()
}

#[test]
fn report_loads_in_headless_chromium_without_errors_and_is_not_blank() {
    let Some(chrome) = chromium() else {
        crate::skip::skipped("browser test: /usr/bin/chromium not found (run tests/setup/packages.sh as root, or apt-get install chromium)");
        return;
    };
    let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("browser-report");
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    let written = legwork::report::write_all(&dir, &fixture::results()).unwrap();

    // Control: a page that does log a console error must be caught, or the
    // check below would pass for the wrong reason.
    let control = dir.join("control.html");
    std::fs::write(
        &control,
        "<!DOCTYPE html><html><body><p>control</p><script>console.error('deliberate control error')</script></body></html>",
    )
    .unwrap();
    let log = load(
        &chrome,
        &control,
        &dir.join("control.png"),
        &dir.join("profile-control"),
    );
    assert!(
        !console_errors(&log).is_empty(),
        "the console-error check did not see the control page's error; log was:\n{log}"
    );

    let png = dir.join("report.png");
    let log = load(&chrome, &written.html, &png, &dir.join("profile-report"));
    let errors = console_errors(&log);
    assert!(errors.is_empty(), "console errors: {errors:#?}");

    let (w, h, stats) = png::luminance_stats(&std::fs::read(&png).unwrap());
    eprintln!("screenshot {} ({w}×{h}): {stats:?}", png.display());
    assert_eq!((w, h), (1280, 2200));
    // A blank page has zero variance; the report has dark text, coloured plots
    // and white space, so its luminance varies a lot.
    assert!(stats.variance > 200.0, "screenshot looks blank: {stats:?}");
    assert!(
        stats.mean < 252.0,
        "screenshot is almost all white: {stats:?}"
    );
    assert!(
        stats.dark_fraction > 0.005,
        "hardly any dark pixels: {stats:?}"
    );
    assert!(stats.distinct_colours > 50, "too few colours: {stats:?}");
}

/// Just enough PNG decoding (zlib inflate, scanline filters) to measure pixels.
mod png {
    use std::collections::HashSet;

    #[derive(Debug)]
    pub struct Stats {
        pub mean: f64,
        pub variance: f64,
        pub dark_fraction: f64,
        pub distinct_colours: usize,
    }

    pub fn luminance_stats(bytes: &[u8]) -> (u32, u32, Stats) {
        assert_eq!(&bytes[..8], b"\x89PNG\r\n\x1a\n", "not a PNG");
        let (mut w, mut h, mut ctype, mut idat) = (0u32, 0u32, 0u8, Vec::new());
        let mut p = 8;
        while p + 8 <= bytes.len() {
            let len = u32::from_be_bytes(bytes[p..p + 4].try_into().unwrap()) as usize;
            let kind = &bytes[p + 4..p + 8];
            let data = &bytes[p + 8..p + 8 + len];
            match kind {
                b"IHDR" => {
                    w = u32::from_be_bytes(data[0..4].try_into().unwrap());
                    h = u32::from_be_bytes(data[4..8].try_into().unwrap());
                    assert_eq!(data[8], 8, "only 8-bit PNGs");
                    ctype = data[9];
                    assert_eq!(data[12], 0, "interlaced PNG not supported");
                }
                b"IDAT" => idat.extend_from_slice(data),
                b"IEND" => break,
                _ => {}
            }
            p += 12 + len;
        }
        let bpp = match ctype {
            2 => 3,
            6 => 4,
            0 => 1,
            4 => 2,
            other => panic!("PNG colour type {other} not supported"),
        };
        let raw = inflate(&idat[2..]);
        let stride = w as usize * bpp;
        let mut img = vec![0u8; stride * h as usize];
        let mut prev = vec![0u8; stride];
        for y in 0..h as usize {
            let line = &raw[y * (stride + 1)..(y + 1) * (stride + 1)];
            let (f, src) = (line[0], &line[1..]);
            let mut cur = vec![0u8; stride];
            for i in 0..stride {
                let a = if i >= bpp { cur[i - bpp] as i32 } else { 0 };
                let b = prev[i] as i32;
                let c = if i >= bpp { prev[i - bpp] as i32 } else { 0 };
                let pred = match f {
                    0 => 0,
                    1 => a,
                    2 => b,
                    3 => (a + b) / 2,
                    4 => {
                        let pp = a + b - c;
                        let (pa, pb, pc) = ((pp - a).abs(), (pp - b).abs(), (pp - c).abs());
                        if pa <= pb && pa <= pc {
                            a
                        } else if pb <= pc {
                            b
                        } else {
                            c
                        }
                    }
                    other => panic!("bad PNG filter {other}"),
                };
                cur[i] = (src[i] as i32 + pred) as u8;
            }
            img[y * stride..(y + 1) * stride].copy_from_slice(&cur);
            prev = cur;
        }
        let n = (w * h) as usize;
        let (mut sum, mut sum2, mut dark) = (0.0, 0.0, 0usize);
        let mut colours = HashSet::new();
        for px in img.chunks(bpp) {
            let (r, g, b) = if bpp >= 3 {
                (px[0], px[1], px[2])
            } else {
                (px[0], px[0], px[0])
            };
            let l = 0.2126 * r as f64 + 0.7152 * g as f64 + 0.0722 * b as f64;
            sum += l;
            sum2 += l * l;
            if l < 80.0 {
                dark += 1;
            }
            if colours.len() < 100_000 {
                colours.insert((r, g, b));
            }
        }
        let mean = sum / n as f64;
        (
            w,
            h,
            Stats {
                mean,
                variance: sum2 / n as f64 - mean * mean,
                dark_fraction: dark as f64 / n as f64,
                distinct_colours: colours.len(),
            },
        )
    }

    struct Bits<'a> {
        data: &'a [u8],
        pos: usize,
        bit: u32,
    }

    impl Bits<'_> {
        fn get(&mut self, n: u32) -> u32 {
            let mut v = 0;
            for i in 0..n {
                let byte = self.data[self.pos];
                v |= (((byte >> self.bit) & 1) as u32) << i;
                self.bit += 1;
                if self.bit == 8 {
                    self.bit = 0;
                    self.pos += 1;
                }
            }
            v
        }
    }

    /// A canonical Huffman code: counts per length and symbols in code order (RFC 1951 §3.2.2).
    struct Huffman {
        counts: [u16; 16],
        symbols: Vec<u16>,
    }

    impl Huffman {
        fn new(lengths: &[u8]) -> Self {
            let mut counts = [0u16; 16];
            for &l in lengths {
                counts[l as usize] += 1;
            }
            counts[0] = 0;
            let mut offs = [0u16; 16];
            for i in 1..16 {
                offs[i] = offs[i - 1] + counts[i - 1];
            }
            let mut symbols = vec![0u16; lengths.len()];
            for (s, &l) in lengths.iter().enumerate() {
                if l != 0 {
                    symbols[offs[l as usize] as usize] = s as u16;
                    offs[l as usize] += 1;
                }
            }
            Huffman { counts, symbols }
        }

        fn decode(&self, bits: &mut Bits) -> u16 {
            let (mut code, mut first, mut index) = (0i32, 0i32, 0i32);
            for len in 1..16 {
                code |= bits.get(1) as i32;
                let count = self.counts[len] as i32;
                if code - count < first {
                    return self.symbols[(index + (code - first)) as usize];
                }
                index += count;
                first += count;
                first <<= 1;
                code <<= 1;
            }
            panic!("bad Huffman code");
        }
    }

    const LEN_BASE: [u16; 29] = [
        3, 4, 5, 6, 7, 8, 9, 10, 11, 13, 15, 17, 19, 23, 27, 31, 35, 43, 51, 59, 67, 83, 99, 115,
        131, 163, 195, 227, 258,
    ];
    const LEN_EXTRA: [u8; 29] = [
        0, 0, 0, 0, 0, 0, 0, 0, 1, 1, 1, 1, 2, 2, 2, 2, 3, 3, 3, 3, 4, 4, 4, 4, 5, 5, 5, 5, 0,
    ];
    const DIST_BASE: [u16; 30] = [
        1, 2, 3, 4, 5, 7, 9, 13, 17, 25, 33, 49, 65, 97, 129, 193, 257, 385, 513, 769, 1025, 1537,
        2049, 3073, 4097, 6145, 8193, 12289, 16385, 24577,
    ];
    const DIST_EXTRA: [u8; 30] = [
        0, 0, 0, 0, 1, 1, 2, 2, 3, 3, 4, 4, 5, 5, 6, 6, 7, 7, 8, 8, 9, 9, 10, 10, 11, 11, 12, 12,
        13, 13,
    ];

    /// Raw DEFLATE (RFC 1951) decoder.
    pub fn inflate(data: &[u8]) -> Vec<u8> {
        let mut out = Vec::new();
        let mut bits = Bits {
            data,
            pos: 0,
            bit: 0,
        };
        loop {
            let last = bits.get(1);
            match bits.get(2) {
                0 => {
                    if bits.bit != 0 {
                        bits.bit = 0;
                        bits.pos += 1;
                    }
                    let len = u16::from_le_bytes([data[bits.pos], data[bits.pos + 1]]) as usize;
                    bits.pos += 4;
                    out.extend_from_slice(&data[bits.pos..bits.pos + len]);
                    bits.pos += len;
                }
                kind @ (1 | 2) => {
                    let (lit, dist) = if kind == 1 {
                        let mut l = [0u8; 288];
                        l[..144].fill(8);
                        l[144..256].fill(9);
                        l[256..280].fill(7);
                        l[280..].fill(8);
                        (Huffman::new(&l), Huffman::new(&[5u8; 30]))
                    } else {
                        let hlit = bits.get(5) as usize + 257;
                        let hdist = bits.get(5) as usize + 1;
                        let hclen = bits.get(4) as usize + 4;
                        const ORDER: [usize; 19] = [
                            16, 17, 18, 0, 8, 7, 9, 6, 10, 5, 11, 4, 12, 3, 13, 2, 14, 1, 15,
                        ];
                        let mut cl = [0u8; 19];
                        for &o in ORDER.iter().take(hclen) {
                            cl[o] = bits.get(3) as u8;
                        }
                        let clh = Huffman::new(&cl);
                        let mut lengths = Vec::with_capacity(hlit + hdist);
                        while lengths.len() < hlit + hdist {
                            match clh.decode(&mut bits) {
                                s @ 0..=15 => lengths.push(s as u8),
                                16 => {
                                    let p = *lengths.last().unwrap();
                                    for _ in 0..3 + bits.get(2) {
                                        lengths.push(p);
                                    }
                                }
                                17 => lengths
                                    .extend(std::iter::repeat(0).take(3 + bits.get(3) as usize)),
                                _ => lengths
                                    .extend(std::iter::repeat(0).take(11 + bits.get(7) as usize)),
                            }
                        }
                        (
                            Huffman::new(&lengths[..hlit]),
                            Huffman::new(&lengths[hlit..]),
                        )
                    };
                    loop {
                        let sym = lit.decode(&mut bits) as usize;
                        if sym < 256 {
                            out.push(sym as u8);
                        } else if sym == 256 {
                            break;
                        } else {
                            let i = sym - 257;
                            let len = LEN_BASE[i] as usize + bits.get(LEN_EXTRA[i] as u32) as usize;
                            let d = dist.decode(&mut bits) as usize;
                            let back =
                                DIST_BASE[d] as usize + bits.get(DIST_EXTRA[d] as u32) as usize;
                            let start = out.len() - back;
                            for k in 0..len {
                                out.push(out[start + k]);
                            }
                        }
                    }
                }
                _ => panic!("bad DEFLATE block type"),
            }
            if last == 1 {
                break;
            }
        }
        out
    }
}
