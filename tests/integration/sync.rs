//! The synchroniser fed by the capture layer: a ci16 capture written to a temporary
//! file, opened through the memory map and searched chunk by chunk with
//! `Capture::read_into`, must give exactly what an in-memory search of the decoded
//! samples gives, and find every burst that was put in.
use iqaudit::capture::encode_raw;
use iqaudit::signal::rrc::{rrc_taps, shape};
use iqaudit::sync::{SyncConfig, Synchroniser};
use iqaudit::{Capture, Cf32, OpenOptions, SampleFormat};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::StandardNormal;

fn qpsk(n: usize, rng: &mut ChaCha8Rng) -> Vec<Cf32> {
    let a = 0.5f32.sqrt();
    (0..n)
        .map(|_| {
            Cf32::new(
                if rng.gen() { a } else { -a },
                if rng.gen() { a } else { -a },
            )
        })
        .collect()
}

#[test]
fn chunked_search_through_a_memory_mapped_ci16_file_equals_the_in_memory_search() {
    let mut rng = ChaCha8Rng::seed_from_u64(41);
    let sps = 4;
    let taps = rrc_taps(0.25, 8, sps);
    let training = qpsk(127, &mut rng);
    let len = 600_000usize;
    let mut x = vec![Cf32::new(0.0, 0.0); len];
    let mut starts = Vec::new();
    for i in 0..5 {
        let mut symbols = qpsk(80, &mut rng);
        symbols.extend_from_slice(&training);
        symbols.extend(qpsk(200, &mut rng));
        let at = 3000 + i * 110_000 + rng.gen_range(0..1000);
        // shape(): symbol k peaks at k·sps + (taps − 1)/2, so training starts at at + 80·sps + 16.
        starts.push(at + 80 * sps + (taps.len() - 1) / 2);
        for (v, s) in x[at..].iter_mut().zip(shape(&symbols, &taps, sps)) {
            *v += s * 0.2;
        }
    }
    for v in x.iter_mut() {
        let a: f32 = rng.sample(StandardNormal);
        let b: f32 = rng.sample(StandardNormal);
        *v += Cf32::new(a, b) * 0.01;
    }
    let dir = crate::util::tempdir();
    let path = dir.path().join("quayside_crane.ci16");
    let mut bytes = Vec::new();
    encode_raw(&x, SampleFormat::Ci16Le, &mut bytes);
    std::fs::write(&path, &bytes).unwrap();
    let opts = OpenOptions {
        format: Some(SampleFormat::Ci16Le),
        ..OpenOptions::default()
    };
    let cap = Capture::open(&path, &opts).unwrap();
    assert_eq!(cap.len(), len);

    let s = Synchroniser::new(&training, &taps, SyncConfig::new(sps, 1e6)).unwrap();
    let chunked = s
        .search_chunked(cap.len(), |start, out: &mut [Cf32]| {
            cap.read_into(start, out).map(|_| ())
        })
        .unwrap();
    let mut decoded = vec![Cf32::new(0.0, 0.0); len];
    cap.read_into(0, &mut decoded).unwrap();
    assert_eq!(chunked, s.search(&decoded).unwrap());
    let found: Vec<usize> = chunked.iter().map(|d| d.start_sample).collect();
    assert_eq!(found, starts);
}
