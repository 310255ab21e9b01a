# A rough independent draw of tap recordings (numpy/scipy modal synthesis,
# not `tonus synth`) in the corpus layout, for spot checks that the
# scorecard's results hold on recordings drawn anew:
#   python3 scripts/independent-draw.py DIR [SEED]   (needs numpy and scipy)
#   cargo run --release --example scorecard -- DIR --each
# 8 isotropic rectangles and 8 circles per seed, two of each tapped at the
# centre; SNR 15-45 dB white or pink, displacement/velocity/acceleration
# pickup, decay tau = tau1 (f1/f)^alpha clipped to 0.05-2 s, a 0.5-2 ms
# raised-cosine-like pulse. Its "expected" modes are simply the 12 lowest
# with coupling above 5 % of the largest (no SNR test), so its recall reads
# low; the open corpus in ../shared/corpus is the reference.
import json, os, sys, numpy as np
from scipy.special import jn_zeros, jv
rng = np.random.default_rng(int(sys.argv[2]) if len(sys.argv) > 2 else 99)
out = sys.argv[1]
fs = 48000
def write_wav(path, x):
    import wave
    x = np.clip(x, -1, 1)
    y = (x * 32767).astype('<i2')
    with wave.open(path, 'wb') as w:
        w.setnchannels(1); w.setsampwidth(2); w.setframerate(fs); w.writeframes(y.tobytes())
def synth(modes, dur=2.0, pre=0.2, snr_db=40, pulse_ms=1.0, pickup_p=0, noise='white'):
    n = int(dur*fs); t = np.arange(n)/fs
    x = np.zeros(n); t0 = pre
    tt = t - t0; on = tt >= 0
    f1 = min(m['f'] for m in modes)
    for m in modes:
        A = m['a'] * (m['f']/f1)**pickup_p
        # raised-cosine pulse spectrum attenuation
        T = pulse_ms/1000; w = 2*np.pi*m['f']
        H = abs(np.sinc(m['f']*T) / (1 - (m['f']*T)**2 + 1e-9))
        x[on] += A*H*np.exp(-tt[on]/m['tau'])*np.cos(2*np.pi*m['f']*tt[on] + rng.uniform(0, 2*np.pi))
    x /= np.max(np.abs(x)) + 1e-12; x *= 0.5
    p = np.mean(x[int(t0*fs):int((t0+0.5)*fs)]**2)
    noise_v = rng.standard_normal(n)
    if noise == 'pink':
        F = np.fft.rfft(noise_v); f = np.fft.rfftfreq(n, 1/fs); f[0] = f[1]; F /= np.sqrt(f); noise_v = np.fft.irfft(F, n)
    noise_v *= np.sqrt(p / 10**(snr_db/10) / np.mean(noise_v**2))
    return x + noise_v
cases = []
k = 0
for i in range(8):  # rectangles, iso
    lx, ly = rng.uniform(0.15, 1.2), rng.uniform(0.15, 1.0)
    sigma = rng.uniform(0.05, 1.0); T = rng.uniform(80, 5000); c = np.sqrt(T/sigma)
    tx, ty = rng.uniform(0.1, 0.9), rng.uniform(0.1, 0.9); px, py = rng.uniform(0.05, 0.95), rng.uniform(0.05, 0.95)
    if i < 2: tx, ty = 0.5, 0.5   # centre taps
    tau1 = rng.uniform(0.2, 1.5); alpha = rng.uniform(0.3, 1.0)
    modes = []
    f11 = c/2*np.sqrt(1/lx**2 + 1/ly**2)
    for m in range(1, 40):
        for nn in range(1, 40):
            f = c/2*np.sqrt((m/lx)**2 + (nn/ly)**2)
            if f > min(12*f11, 0.4*fs): continue
            a = np.sin(m*np.pi*tx)*np.sin(nn*np.pi*ty)*np.sin(m*np.pi*px)*np.sin(nn*np.pi*py)
            tau = float(np.clip(tau1*(f11/f)**alpha, 0.05, 2.0))
            modes.append(dict(m=m, n=nn, f=f, a=a, tau=tau))
    cases.append(('rect', dict(shape='rect', lx_m=lx, ly_m=ly, sigma_kg_m2=sigma, model='iso'), T, modes, rng.choice(['white','pink']), rng.uniform(15, 45), rng.choice([-1, 0, 1])))
for i in range(8):  # circles
    a_r = rng.uniform(0.1, 0.3); sigma = rng.uniform(0.2, 0.4); T = rng.uniform(500, 6000); c = np.sqrt(T/sigma)
    rt, th_t = rng.uniform(0, 0.9), rng.uniform(0, 2*np.pi); rp, th_p = rng.uniform(0, 0.9), rng.uniform(0, 2*np.pi)
    if i < 2: rt = 0.0
    tau1 = rng.uniform(0.2, 1.5); alpha = rng.uniform(0.3, 1.0)
    f01 = 2.404826*c/(2*np.pi*a_r)
    modes = []
    for m in range(0, 30):
        for nn, j in enumerate(jn_zeros(m, 12), 1):
            f = j*c/(2*np.pi*a_r)
            if f > min(10*f01, 0.4*fs): continue
            amp = jv(m, j*rt)*jv(m, j*rp)*(np.cos(m*(th_t - th_p)) if m > 0 else 1.0)
            tau = float(np.clip(tau1*(f01/f)**alpha, 0.05, 2.0))
            modes.append(dict(m=m, n=nn, f=f, a=amp, tau=tau))
    cases.append(('circle', dict(shape='circle', diameter_m=2*a_r, sigma_kg_m2=sigma, model='iso'), T, modes, rng.choice(['white','pink']), rng.uniform(15, 45), rng.choice([-1, 0, 1])))
for idx, (kind, inputs, T, modes, noise, snr, pp) in enumerate(cases):
    cid = f"{'hard_' if snr < 25 else ''}{kind}_{idx:02d}"
    d = os.path.join(out, cid); os.makedirs(d, exist_ok=True)
    x = synth(modes, snr_db=snr, noise=noise, pickup_p=pp, pulse_ms=rng.uniform(0.5, 2.0))
    write_wav(os.path.join(d, 'rec.wav'), x)
    amax = max(abs(m['a']) for m in modes)
    ms = sorted(modes, key=lambda m: m['f'])
    det = [m for m in ms if abs(m['a']) > 0.05*amax]
    exp_set = set(id(m) for m in det[:12])
    truth = dict(case_id=cid, category=('hard_' if snr < 25 else '') + kind, expect='result', inputs=inputs,
                 truth=dict(tension_n_per_m=T), excitation={},
                 modes=[dict(m=m['m'], n=m['n'], freq_hz=m['f'], expected=id(m) in exp_set, detectable=id(m) in set(map(id, det))) for m in ms])
    json.dump(truth, open(os.path.join(d, 'truth.json'), 'w'), indent=1)
print(len(cases), 'cases in', out)
