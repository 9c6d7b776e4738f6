//! Reading observed trajectories: streaming gives identical results however the samples are cut
//! into chunks and whichever format carries them; bad files give one-line errors naming the file
//! and the line; no transition gives no rate. The data are short Euler–Maruyama runs in a double
//! well (E_b = 4 kT, D = 1) from fixed-seed streams.

use escapade::observe::counts::DiffusionOptions;
use escapade::observe::propagator::BayesSettings;
use escapade::observe::{
    self, ColumnRef, Columns, Interval, ObserveError, ObservedReport, Options, Source,
};
use escapade::seed;
use rand::RngExt;
use rand_distr::StandardNormal;
use std::path::{Path, PathBuf};

const DT: f64 = 2e-3;

/// Euler–Maruyama at step 2e-4, recorded every 10 steps.
fn trajectory(index: u64, samples: usize, eb: f64) -> Vec<f64> {
    let mut rng = seed::stream(77, index);
    let h: f64 = 2e-4;
    let s = (2.0 * h).sqrt();
    let mut x = -1.0;
    (0..samples)
        .map(|_| {
            for _ in 0..10 {
                x += -4.0 * eb * x * (x * x - 1.0) * h + s * rng.sample::<f64, _>(StandardNormal);
            }
            x
        })
        .collect()
}

fn dir(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("escapade-obs-{}-{name}", std::process::id()));
    std::fs::create_dir_all(&d).unwrap();
    d
}

/// A .npy file (format 1.0) of `cols` columns, C or Fortran order, float64 or float32.
fn write_npy(path: &Path, data: &[Vec<f64>], fortran: bool, f32s: bool) {
    let rows = data[0].len();
    let shape = if data.len() == 1 {
        format!("({rows},)")
    } else {
        format!("({rows}, {})", data.len())
    };
    let descr = if f32s { "<f4" } else { "<f8" };
    let order = if fortran { "True" } else { "False" };
    let mut dict = format!("{{'descr': '{descr}', 'fortran_order': {order}, 'shape': {shape}, }}");
    while (10 + dict.len() + 1) % 64 != 0 {
        dict.push(' ');
    }
    dict.push('\n');
    let mut b = b"\x93NUMPY\x01\x00".to_vec();
    b.extend_from_slice(&(dict.len() as u16).to_le_bytes());
    b.extend_from_slice(dict.as_bytes());
    let mut put = |v: f64| {
        if f32s {
            b.extend_from_slice(&(v as f32).to_le_bytes());
        } else {
            b.extend_from_slice(&v.to_le_bytes());
        }
    };
    if fortran {
        for c in data {
            c.iter().for_each(|&v| put(v));
        }
    } else {
        for i in 0..rows {
            data.iter().for_each(|c| put(c[i]));
        }
    }
    std::fs::write(path, b).unwrap();
}

/// The report without the trajectory names (which differ between formats).
fn body(r: &ObservedReport) -> String {
    let mut v = serde_json::to_value(r).unwrap();
    v.as_object_mut().unwrap().remove("trajectories");
    v.to_string()
}

fn data() -> Vec<Vec<f64>> {
    (0..2).map(|i| trajectory(i, 200_000, 4.0)).collect()
}

fn options() -> Options {
    Options {
        dt: Some(DT),
        ..Options::default()
    }
}

// (d) Streaming: the accumulators see one sample at a time, so cutting the samples into chunks of
// 1, 7, 4096 or everything at once, and reading them from memory, text or .npy (float64 values
// written with Rust's shortest round-trip format), gives bit-identical reports.
#[test]
fn chunking_and_format_do_not_change_anything() {
    let d = data();
    let mem: Vec<Source> = d
        .iter()
        .enumerate()
        .map(|(i, v)| Source::Samples {
            name: format!("t{i}"),
            values: v.clone(),
            dt: DT,
        })
        .collect();
    let reference = observe::analyse(&mem, &options()).unwrap();
    assert!(reference.kinetics.forward.transitions > 0);
    let want = body(&reference);
    for chunk in [1, 7, 4096, usize::MAX] {
        let o = Options { chunk, ..options() };
        assert_eq!(
            body(&observe::analyse(&mem, &o).unwrap()),
            want,
            "chunk {chunk}"
        );
    }
    let dd = dir("formats");
    let mut text = Vec::new();
    let mut npy = Vec::new();
    for (i, v) in d.iter().enumerate() {
        let t = dd.join(format!("t{i}.txt"));
        let mut s = String::from("# an observed coordinate\nx\n");
        for x in v {
            s.push_str(&format!("{x}\n"));
        }
        std::fs::write(&t, s).unwrap();
        text.push(Source::File(t));
        let n = dd.join(format!("t{i}.npy"));
        write_npy(&n, std::slice::from_ref(v), false, false);
        npy.push(Source::File(n));
    }
    assert_eq!(body(&observe::analyse(&text, &options()).unwrap()), want);
    assert_eq!(body(&observe::analyse(&npy, &options()).unwrap()), want);

    // a time column (C and Fortran order): the sampling interval is the mean of the column, so the
    // times agree to rounding only; the counts are identical
    let times: Vec<f64> = (0..d[0].len()).map(|i| 5.0 + i as f64 * DT).collect();
    let both = |fortran: bool| -> ObservedReport {
        let p = dd.join(format!("tx{fortran}.npy"));
        write_npy(&p, &[times.clone(), d[0].clone()], fortran, false);
        observe::analyse(&[Source::File(p)], &Options::default()).unwrap()
    };
    let (c, f) = (both(false), both(true));
    assert_eq!(body(&c), body(&f));
    let one = observe::analyse(&mem[..1], &options()).unwrap();
    assert_eq!(
        c.kinetics.forward.transitions,
        one.kinetics.forward.transitions
    );
    assert!((c.trajectories[0].dt - DT).abs() < 1e-12);
    // float32 data read as such (the values change, the reading works)
    let p = dd.join("f32.npy");
    write_npy(&p, std::slice::from_ref(&d[0]), false, true);
    assert_eq!(
        observe::analyse(&[Source::File(p)], &options())
            .unwrap()
            .samples,
        d[0].len() as u64
    );
    std::fs::remove_dir_all(&dd).ok();
}

fn error_of(name: &str, content: &str, opts: &Options) -> String {
    let d = dir("bad");
    let p = d.join(name);
    std::fs::write(&p, content).unwrap();
    let e: ObserveError = observe::analyse(&[Source::File(p)], opts).unwrap_err();
    let s = e.to_string();
    assert!(!s.contains('\n'), "one line: {s}");
    assert!(s.contains(name), "names the file: {s}");
    s
}

fn long(lines: &[&str]) -> String {
    let mut s: String = (0..200).map(|i| format!("{i} {}\n", i % 3)).collect();
    for l in lines {
        s.push_str(l);
        s.push('\n');
    }
    s
}

// (c) Bad files: each error is one line naming the file and the line.
#[test]
fn bad_files_give_one_line_errors() {
    let o = Options::default();
    let e = error_of("word.txt", &long(&["200 abc"]), &o);
    assert!(e.contains("line 201") && e.contains("not a number"), "{e}");
    let e = error_of("nan.txt", &long(&["200 NaN"]), &o);
    assert!(
        e.contains("line 201") && e.contains("not a finite number"),
        "{e}"
    );
    let e = error_of("inf.txt", &long(&["200 inf"]), &o);
    assert!(
        e.contains("line 201") && e.contains("not a finite number"),
        "{e}"
    );
    let e = error_of("back.txt", &long(&["198.5 1"]), &o);
    assert!(
        e.contains("line 201") && e.contains("does not increase"),
        "{e}"
    );
    let e = error_of("skip.txt", &long(&["201 1"]), &o);
    assert!(
        e.contains("line 201") && e.contains("uneven time step"),
        "{e}"
    );
    let e = error_of("fields.txt", &long(&["200 1 2"]), &o);
    assert!(e.contains("line 201") && e.contains("3 fields"), "{e}");
    let e = error_of("one.txt", "# c\n1 0.5\n", &o);
    assert!(e.contains("1 sample(s)"), "{e}");
    let e = error_of("short.txt", "0 1\n1 2\n2 3\n", &o);
    assert!(e.contains("3 samples in all"), "{e}");
    let e = error_of("empty.txt", "# nothing\n\n", &o);
    assert!(e.contains("no samples"), "{e}");
    let e = error_of("three.txt", "1 2 3\n", &o);
    assert!(
        e.contains("line 1") && e.contains("which one is the position"),
        "{e}"
    );
    let e = error_of("nodt.txt", "1\n2\n", &o);
    assert!(e.contains("sampling interval"), "{e}");
    let named = Options {
        columns: Columns {
            position: Some(ColumnRef::Name("q".into())),
            time: None,
        },
        ..Options::default()
    };
    let e = error_of("header.txt", "t,x\n0,1\n", &named);
    assert!(e.contains("line 1") && e.contains("no column \"q\""), "{e}");
    let e = error_of("magic.npy", "not numpy at all", &o);
    assert!(e.contains("not a .npy file"), "{e}");
    let d = dir("npy");
    let p = d.join("nan.npy");
    let mut v = vec![0.0; 150];
    v[120] = f64::NAN;
    write_npy(&p, &[v], false, false);
    let e = observe::analyse(&[Source::File(p)], &Options { dt: Some(0.1), ..o })
        .unwrap_err()
        .to_string();
    assert!(e.contains("nan.npy: row 121"), "{e}");
    std::fs::remove_dir_all(&d).ok();
}

// (c) No transition: a trajectory that stays in one well (E_b = 8 kT, 400 time units against an
// MFPT of ~10^3.. far longer) gives no rate, only an upper bound and a warning; automatic cores
// find no second minimum and say so.
#[test]
fn no_transition_gives_no_rate() {
    let v = trajectory(5, 100_000, 8.0);
    assert!(v.iter().all(|&x| x < 0.0), "the trajectory crossed");
    let src = [Source::Samples {
        name: "stuck".into(),
        values: v,
        dt: DT,
    }];
    let o = Options {
        cores: Some([
            Interval { lo: -1.3, hi: -0.7 },
            Interval { lo: 0.7, hi: 1.3 },
        ]),
        ..options()
    };
    let r = observe::analyse(&src, &o).unwrap();
    let f = &r.kinetics.forward;
    assert_eq!(f.transitions, 0);
    assert!(f.rate.is_none() && f.ci95.is_none());
    assert!(f.upper95.unwrap() > 0.0);
    assert!(r.kinetics.backward.rate.is_none() && r.kinetics.backward.upper95.is_none());
    assert!(
        r.warnings.iter().any(|w| w.contains("no A → B transition")),
        "{:?}",
        r.warnings
    );
    assert!(
        r.warnings
            .iter()
            .any(|w| w.contains("core B was never visited"))
    );
    let e = observe::analyse(&src, &options()).unwrap_err().to_string();
    assert!(e.contains("no second free-energy minimum"), "{e}");
    let bad = Options {
        cores: Some([
            Interval { lo: -1.0, hi: 0.5 },
            Interval { lo: 0.0, hi: 1.0 },
        ]),
        ..options()
    };
    let e = observe::analyse(&src, &bad).unwrap_err().to_string();
    assert!(e.starts_with("cores:") && e.contains("overlap"), "{e}");
}

// (e) The D(x) pass streams too: the transition counts and increments at several lags keep a
// ring buffer per trajectory, so chunks of 1, 7, 4096 or everything give bit-identical D(x),
// lag scan and conditional moments; the other parts of the report are those of the run without
// it, bit for bit (the pass only adds a sink). A short chain keeps the fits quick (the check is
// identity, not accuracy).
#[test]
fn diffusion_pass_does_not_depend_on_the_chunks() {
    let mem: Vec<Source> = (0..2)
        .map(|i| Source::Samples {
            name: format!("t{i}"),
            values: trajectory(i, 40_000, 4.0),
            dt: DT,
        })
        .collect();
    let with = |chunk: usize| Options {
        chunk,
        diffusion: Some(DiffusionOptions {
            lags: vec![3, 1],
            bins: Some(12),
            settings: BayesSettings {
                iterations: 200,
                burn_in: 100,
                ..BayesSettings::default()
            },
        }),
        ..options()
    };
    let reference = observe::analyse(&mem, &with(4096)).unwrap();
    let d = reference.diffusion.as_ref().unwrap();
    // lags sorted
    let lags: Vec<usize> = d.scan.fits.iter().map(|f| f.lag_frames).collect();
    assert_eq!(lags, [1, 3]);
    assert!(d.scan.fits[0].transitions > 70_000);
    let want = body(&reference);
    for chunk in [1, 7, usize::MAX] {
        assert_eq!(
            body(&observe::analyse(&mem, &with(chunk)).unwrap()),
            want,
            "chunk {chunk}"
        );
    }
    let mut without = serde_json::to_value(observe::analyse(&mem, &options()).unwrap()).unwrap();
    let mut v = serde_json::to_value(&reference).unwrap();
    v.as_object_mut().unwrap().remove("diffusion");
    without.as_object_mut().unwrap().remove("diffusion");
    // the D(x) warnings are added at the end of the list
    let n = without["warnings"].as_array().unwrap().len();
    v["warnings"].as_array_mut().unwrap().truncate(n);
    assert_eq!(v, without);
}
