//! Measures the mean width error of the edge stage on noisy trapezoid marks (debugging aid).
use ooksift::edges::{EdgeConfig, EdgeDetector};
use ooksift::rng::Rng;

fn main() {
    let rate = 48_000.0;
    let w = 33.6; // samples
    for &(noise, smooth) in &[(0.0f32, 1usize), (0.1, 1), (0.3, 1), (0.3, 11), (0.5, 11)] {
        let mut rng = Rng::new(5);
        let mut env = vec![];
        let mut truth = vec![];
        let mut t = 200.0;
        for _ in 0..300 {
            truth.push((t, t + w));
            t += w + 3.0 * w;
        }
        let n = (t + 200.0) as usize;
        for k in 0..n {
            let x = k as f64;
            let mut v = 0.0;
            for &(r, f) in &truth {
                let lo = (x - 0.5f64).max(r);
                let hi = (x + 0.5f64).min(f);
                if hi > lo {
                    v += hi - lo;
                }
            }
            env.push(0.05 + 0.6 * v as f32 + noise * rng.gauss() as f32);
        }
        let h = smooth / 2;
        let sm: Vec<f32> = (0..n)
            .map(|k| {
                let lo = k.saturating_sub(h);
                let hi = (k + h + 1).min(n);
                env[lo..hi].iter().sum::<f32>() / (hi - lo) as f32
            })
            .collect();
        let mut det = EdgeDetector::new(EdgeConfig::for_rate(rate));
        let mut marks = vec![];
        det.process(&sm, &[], &mut marks);
        det.finish(&mut marks);
        if std::env::args().nth(1).is_some() {
            let (floor, _) = det.floor_and_noise();
            ooksift::edges::refine_edges(&sm, floor, &mut marks, h + 3);
        }
        let mut errs = vec![];
        let mut rerr = vec![];
        for m in &marks {
            if let Some(tr) = truth.iter().find(|tr| (tr.0 - m.rise).abs() < w / 2.0) {
                errs.push(m.width() - w);
                rerr.push(m.rise - tr.0);
            }
        }
        let mean = errs.iter().sum::<f64>() / errs.len().max(1) as f64;
        let rmean = rerr.iter().sum::<f64>() / rerr.len().max(1) as f64;
        println!("noise {noise} smooth {smooth}: {} marks ({} matched), width error {mean:+.3} samples, rise error {rmean:+.3}", marks.len(), errs.len());
    }
}
