#!/bin/bash
# CFO error RMS against the Cramér–Rao bound (Rife & Boorstyn 1974) of the whole burst (64 + 2000 symbols,
# SNR = Es/N0·‖h‖², 250 kBd); bursts matched to the truth by start sample.
# usage: crb.sh BIN PROFILE CHANNEL ESN0 SEEDS... (profile: payload of 2000 symbols)
export DIR=${DIR:-/tmp/iqaudit-carrier}; mkdir -p "$DIR"
B=$1; P=$2; CH=$3; E=$4; shift 4
for seed in "$@"; do $B synth --profile $P --out $DIR/q$seed.cf32 --esn0-db $E --bursts 40 --seed $seed --channel "$CH" --cfo-hz 300 >/dev/null 2>&1; $B analyse $DIR/q$seed.cf32 --profile $P --json > $DIR/q$seed.json 2>/dev/null; done
python3 - $E $CH "$@" <<'PY'
import os
D=os.environ.get('DIR','/tmp/iqaudit-carrier')
import json,sys,math
E=float(sys.argv[1]); h=[float(x) for x in sys.argv[2].split(',')]
e=[];et=[]
for s in sys.argv[3:]:
    r=json.load(open(f'{D}/q{s}.json')); t=json.load(open(f'{D}/q{s}.cf32.truth.json'))
    for b in r['bursts']:
        m=[tb for tb in t['bursts'] if abs(tb['start_sample']-b['start_sample'])<8]
        if not m: continue
        tb=m[0]
        e.append(b['cfo_hz']-tb['cfo_hz']); et.append(b['cfo_training_hz']-tb['cfo_hz'])
N=64+2000; snr=10**(E/10)*sum(x*x for x in h); rs=250e3
crb=math.sqrt(6/((2*math.pi)**2*snr*N*(N*N-1)))*rs
crbt=math.sqrt(6/((2*math.pi)**2*snr*64*(64*64-1)))*rs
rms=math.sqrt(sum(x*x for x in e)/len(e)); rmst=math.sqrt(sum(x*x for x in et)/len(et))
print(f"n {len(e)} final RMS {rms:.3f} Hz, CRB {crb:.3f} Hz, ratio {rms/crb:.2f}; training RMS {rmst:.2f} Hz vs CRB(64) {crbt:.2f} ratio {rmst/crbt:.2f}; max {max(map(abs,e)):.2f}")
PY
