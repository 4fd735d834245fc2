#!/bin/bash
# Sweep of #15: synth 40-burst captures per seed through CHANNEL at ESN0 and summarise CFO, SER, EVM.
# usage: sweep.sh BIN PROFILE CHANNEL ESN0 SEEDS... (scratch: $DIR, default /tmp/iqaudit-carrier)
export DIR=${DIR:-/tmp/iqaudit-carrier}; mkdir -p "$DIR"
B=$1; P=$2; CH=$3; E=$4; shift 4
for seed in "$@"; do $B synth --profile $P --out $DIR/t$seed.cf32 --esn0-db $E --bursts 40 --seed $seed --channel "$CH" >/dev/null 2>&1; $B analyse $DIR/t$seed.cf32 --profile $P --json > $DIR/t$seed.json 2>/dev/null; done
python3 - "$@" <<'PY'
import os
D=os.environ.get('DIR','/tmp/iqaudit-carrier')
import json,sys,statistics as st
b=[]
for s in sys.argv[1:]:
    b+=json.load(open(f'{D}/t{s}.json'))['bursts']
cfo=[abs(x['cfo_hz']) for x in b]; ser=[x['metrics']['ser']['rate'] for x in b]; evm=[x['metrics']['evm_rms_percent'] for x in b]
import math
print(f"bursts {len(b)} max|cfo| {max(cfo):.1f} Hz  >50Hz {sum(c>50 for c in cfo)}  SER>1e-2 {sum(s>1e-2 for s in ser)}  median EVM {st.median(evm):.3f}% ({20*math.log10(st.median(evm)/100):.2f} dB)  warnings {sum(len(x['warnings']) for x in b)}")
PY
