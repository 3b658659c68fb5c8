//! How long does the page's work for one edit take natively? The browser benchmark
//! (`tests/browser/bench.js`) measures the same steps in wasm; this one shows where the time goes
//! without the browser around it. The design is the geophone demo of the browser benchmark (an
//! 8th-order Butterworth low-pass in four multiple-feedback stages, limits from the converter).
//! Each iteration types another cutoff, as the browser benchmark does, so that nothing cached for
//! the previous mask can be reused.
//!
//! Groups: the whole evaluation of a link (`page::evaluate`: synthesis, board, family comparison,
//! sweeps and every analysis), building the ten figures from it, and drawing them and the stage
//! schematics to SVG (a stand-in for the canvas: the same plot code, another backend).

use criterion::{criterion_group, criterion_main, Criterion};
use rolloff::app as page;
use rolloff::plot::figures::PlotKind;
use rolloff::plot::{self, Look, Theme};
use std::hint::black_box;

const LINK: &str =
    "v=1&title=Geophone+front+end&fsample=2k&adcbits=24&fsignal=200&family=butterworth&topo=mfb";

fn link(i: usize) -> String {
    // Cutoffs between 180 and 260 Hz, as the browser benchmark types them.
    LINK.replace("fsignal=200", &format!("fsignal={}", 180 + 2 * (i % 40)))
}

fn bench(c: &mut Criterion) {
    let mut group = c.benchmark_group("page_edit");
    group.sample_size(30);
    let mut i = 0;
    group.bench_function("evaluate a typed cutoff", |b| {
        b.iter(|| {
            i += 1;
            black_box(page::evaluate(&link(i)))
        })
    });
    let model = page::evaluate(LINK)
        .model
        .expect("the benchmark link composes");
    group.bench_function("build the ten figures", |b| {
        b.iter(|| {
            for kind in PlotKind::ALL {
                black_box(model.figure(kind));
            }
        })
    });
    let figures: Vec<_> = PlotKind::ALL.iter().map(|&k| model.figure(k)).collect();
    let look = Look {
        theme: Theme::Light,
        scale: 1.0,
        compact: false,
    };
    group.bench_function("draw the figures and schematics to SVG", |b| {
        b.iter(|| {
            let mut total = 0;
            for figure in &figures {
                total += plot::render_svg(figure, 640, 300, Theme::Light)
                    .expect("SVG drawing")
                    .len();
            }
            for stage in &model.design.board.stages {
                total += rolloff::schematic::render_svg(&stage.netlist, 360, 200, &look)
                    .expect("SVG drawing")
                    .len();
            }
            black_box(total)
        })
    });
    group.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
