//! `|P(jω)|²` of a real polynomial as a polynomial in `x = ω²`, without allocating: one
//! polynomial at a time, or several side by side in lanes (the tolerance study's batches), every
//! lane doing the scalar operations in the same order so the results are bit-identical.

/// `|P(jy)|²` as a polynomial in `x = y²` written into `out` (length ≥ len(p)); see
/// [`super::poly::Poly::magnitude_squared_in_x`]. Returns the number of coefficients written.
pub fn magnitude_squared_into(p: &[f64], out: &mut [f64]) -> usize {
    const MAXC: usize = 32;
    let len = p.len();
    // The common sizes written out: |p0 + p1·jy + p2·(jy)² + p3·(jy)³|² =
    // p0² + (p1² − 2·p0·p2)·x + (p2² − 2·p1·p3)·x² + p3²·x³.
    if len == 4 && out.len() >= 4 {
        out[0] = p[0] * p[0];
        out[1] = p[1] * p[1] - 2.0 * p[0] * p[2];
        out[2] = p[2] * p[2] - 2.0 * p[1] * p[3];
        out[3] = p[3] * p[3];
        return 4;
    }
    if len == 3 && out.len() >= 3 {
        out[0] = p[0] * p[0];
        out[1] = p[1] * p[1] - 2.0 * p[0] * p[2];
        out[2] = p[2] * p[2];
        return 3;
    }
    // |P(jy)|² = E(−x)² + x·O(−x)² with E, O the even and odd parts (x = y²).
    let mut even = [0.0f64; MAXC];
    let mut odd = [0.0f64; MAXC];
    if len > 2 * MAXC {
        // Beyond any stage Rolloff builds; the plain double sum below still applies.
        out[..len].iter_mut().for_each(|v| *v = 0.0);
        for a in 0..len {
            let mut b = a % 2;
            while b < len {
                let m = (a + b) / 2;
                let term = p[a] * p[b];
                out[m] += if (m + b) % 2 == 0 { term } else { -term };
                b += 2;
            }
        }
        return len;
    }
    let (mut n_even, mut n_odd) = (0, 0);
    for (i, &c) in p.iter().enumerate() {
        let v = if (i / 2) % 2 == 0 { c } else { -c };
        if i % 2 == 0 {
            even[i / 2] = v;
            n_even = i / 2 + 1;
        } else {
            odd[i / 2] = v;
            n_odd = i / 2 + 1;
        }
    }
    let mut acc = [0.0f64; 2 * MAXC];
    for a in 0..n_even {
        for b in 0..n_even {
            acc[a + b] += even[a] * even[b];
        }
    }
    for a in 0..n_odd {
        for b in 0..n_odd {
            acc[a + b + 1] += odd[a] * odd[b];
        }
    }
    out[..len].copy_from_slice(&acc[..len]);
    len
}

/// [`magnitude_squared_into`] for `L` polynomials side by side: `p[i][l]` is coefficient `i` of
/// polynomial `l`; `out` (length ≥ `p.len()`) receives the coefficients in x the same way. Every
/// lane does the operations of the scalar function in the same order, so each lane's result is
/// bit-identical to it. Returns the number of coefficients written.
#[inline(always)]
pub fn magnitude_squared_lanes<const L: usize>(p: &[[f64; L]], out: &mut [[f64; L]]) -> usize {
    const MAXC: usize = 16;
    let len = p.len();
    if out.len() < len {
        return 0;
    }
    match p {
        [p0] => {
            for l in 0..L {
                out[0][l] = p0[l] * p0[l];
            }
        }
        [p0, p1] => {
            for l in 0..L {
                out[0][l] = p0[l] * p0[l];
                out[1][l] = p1[l] * p1[l];
            }
        }
        [p0, p1, p2] => {
            for l in 0..L {
                out[0][l] = p0[l] * p0[l];
                out[1][l] = p1[l] * p1[l] - 2.0 * p0[l] * p2[l];
                out[2][l] = p2[l] * p2[l];
            }
        }
        [p0, p1, p2, p3] => {
            for l in 0..L {
                out[0][l] = p0[l] * p0[l];
                out[1][l] = p1[l] * p1[l] - 2.0 * p0[l] * p2[l];
                out[2][l] = p2[l] * p2[l] - 2.0 * p1[l] * p3[l];
                out[3][l] = p3[l] * p3[l];
            }
        }
        _ if len <= 2 * MAXC => {
            // The even/odd products of the scalar function, lane by lane.
            let mut even = [[0.0f64; L]; MAXC];
            let mut odd = [[0.0f64; L]; MAXC];
            let (mut n_even, mut n_odd) = (0, 0);
            for (i, c) in p.iter().enumerate() {
                let negate = (i / 2) % 2 != 0;
                let dst = if i % 2 == 0 {
                    n_even = i / 2 + 1;
                    &mut even[i / 2]
                } else {
                    n_odd = i / 2 + 1;
                    &mut odd[i / 2]
                };
                for l in 0..L {
                    dst[l] = if negate { -c[l] } else { c[l] };
                }
            }
            let mut acc = [[0.0f64; L]; 2 * MAXC];
            for a in 0..n_even {
                for b in 0..n_even {
                    for l in 0..L {
                        acc[a + b][l] += even[a][l] * even[b][l];
                    }
                }
            }
            for a in 0..n_odd {
                for b in 0..n_odd {
                    for l in 0..L {
                        acc[a + b + 1][l] += odd[a][l] * odd[b][l];
                    }
                }
            }
            out[..len].copy_from_slice(&acc[..len]);
        }
        _ => {
            // Beyond any stage Rolloff builds: lane by lane through the scalar function.
            let mut poly = vec![0.0; len];
            let mut sq = vec![0.0; len];
            for l in 0..L {
                for (dst, c) in poly.iter_mut().zip(p) {
                    *dst = c[l];
                }
                magnitude_squared_into(&poly, &mut sq);
                for (o, &v) in out.iter_mut().zip(&sq) {
                    o[l] = v;
                }
            }
        }
    }
    len
}
