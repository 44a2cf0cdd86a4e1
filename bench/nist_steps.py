#!/usr/bin/env python3
"""Iterations of plain and geodesic-accelerated steps on the NIST StRD problems
(certified values), both starts, both scales (docs/fitting.md).

Usage: cargo build && python3 bench/nist_steps.py
"""
import json, os, subprocess, sys, tempfile
ROOT=os.path.join(os.path.dirname(os.path.abspath(__file__)), '..')
R=os.path.join(ROOT, 'target/debug/ratewright')
D=os.path.join(ROOT, 'tests/data/nist-strd')
laws={'Misra1a':'b1*(1-exp(-b2*x))','Chwirut2':'exp(-b1*x)/(b2+b3*x)','DanWood':'b1*x^b2',
'Misra1b':'b1*(1-(1+b2*x/2)^(-2))','Eckerle4':'(b1/b2)*exp(-0.5*((x-b3)/b2)^2)',
'Thurber':'(b1 + b2*x + b3*x^2 + b4*x^3)/(1 + b5*x + b6*x^2 + b7*x^3)'}
def read(name):
    names=[];s1=[];s2=[];vals=[];data=[];ssr=None;ind=False
    for line in open(f'{D}/{name}.dat'):
        t=line.split()
        if ind:
            if len(t)==2: data.append((t[0],t[1]))
            continue
        if len(t)==6 and t[1]=='=' and t[0].startswith('b'):
            names.append(t[0]);s1.append(t[2]);s2.append(t[3]);vals.append(float(t[4]))
        if line.strip().startswith('Residual Sum of Squares:'): ssr=float(t[-1])
        if line.startswith('Data:') and len(t)>1 and t[1]=='y': ind=True
    return names,[s1,s2],vals,ssr,data
extra=sys.argv[1:]
TMP=tempfile.mkdtemp()
M=os.path.join(TMP, 'm.mech')
C=os.path.join(TMP, 'd.csv')
for name,law in laws.items():
    names,starts,vals,ssr,data=read(name)
    open(M,'w').write('species y\nparam x = 0\n'+''.join(f'param {n} = 1\n' for n in names)+f'step s 0 -> y law {law}\n')
    open(C,'w').write('v,x\n'+''.join(f'{y},{x}\n' for y,x in data))
    for k in (0,1):
        for scale in ('linear','log'):
          row=[]
          for step in ('plain','geodesic'):
            free=','.join(f'{n}={s}' for n,s in zip(names,starts[k]))
            out=subprocess.run([R,'fit',M,'--data',C,'--free',free,'--scale',scale,'--step',step,'--format','json']+extra,capture_output=True,text=True)
            try:
                j=json.loads(out.stdout)
                ok=abs(j['ssr']-ssr)/ssr<1e-6 and all(abs(j['parameters'][n]['value']-v)/abs(v)<1e-6 for n,v in zip(names,vals))
                row.append(f"{step}:{'ok ' if ok else 'BAD'} it={j['iterations']:4d}")
            except Exception as e:
                row.append(f"{step}: ERR {out.stderr[:80]!r}")
          print(f'{name:9s} start{k+1} {scale:6s}', ' | '.join(row))
