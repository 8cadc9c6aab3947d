//! Welch's PSD against a reference library: scipy.signal.welch on the same
//! series (tests/reference/welch.py → welch.json).

use curlew::spectra::welch;

#[test]
fn welch_psd_equals_scipy() {
    let p = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/reference/welch.json");
    let r: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(p).unwrap()).unwrap();
    let nums = |v: &serde_json::Value| -> Vec<f64> {
        v.as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_f64().unwrap())
            .collect()
    };
    let x = nums(&r["x"]);
    let fs = r["fs"].as_f64().unwrap();
    for (nperseg, c) in r["cases"].as_object().unwrap() {
        let nperseg: usize = nperseg.parse().unwrap();
        let noverlap = c["noverlap"].as_u64().unwrap() as usize;
        let ours = welch("x", &x, fs, nperseg, noverlap, 0.95).unwrap();
        let (f, psd) = (nums(&c["freq"]), nums(&c["psd"]));
        assert_eq!(ours.freq.len(), f.len(), "nperseg {nperseg}");
        let peak = psd.iter().cloned().fold(0.0, f64::max);
        for i in 0..f.len() {
            assert!((ours.freq[i] - f[i]).abs() < 1e-12);
            let d = (ours.psd[i] - psd[i]).abs();
            assert!(
                d < 1e-12 * peak + 1e-10 * psd[i],
                "nperseg {nperseg}, bin {i}: {} vs scipy {}",
                ours.psd[i],
                psd[i]
            );
            assert!(ours.lower[i] < ours.psd[i] && ours.psd[i] < ours.upper[i]);
        }
    }
}
