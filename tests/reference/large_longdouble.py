"""Reference coefficients for tests/large.rs, computed by numpy in extended precision.

Regenerates the invented data of tests/large.rs (same generator, seed and formulas: y = 10 +
level effect + (0.8 + level slope) x + noise, 4-level factor g, x uniform on [20, 80]) and
solves the least-squares problem y on g + x + g by x (treatment coding) in numpy.longdouble
(80-bit extended precision on x86-64, 64-bit mantissa): normal equations of the centred
design, Gaussian elimination with partial pivoting. The centred cross-product matrix has a
condition number of a few hundred, so these values carry about 16 correct digits, enough
to judge covey's double-precision results at 1e-12.

Usage: python3 tests/reference/large_longdouble.py   (needs numpy; about a minute)
Printed with numpy 2.x on x86-64.
"""
import numpy as np
ROWS=300000
M=2**64
state=20261201
def nxt():
    global state
    state=(state*6364136223846793005+1442695040888963407)%M
    return (state>>11)/float(1<<53)
eff=[0.0,1.5,-0.75,2.25]; sl=[0.0,0.05,-0.03,0.02]
y=np.empty(ROWS); x=np.empty(ROWS); g=np.empty(ROWS,dtype=int)
for i in range(ROWS):
    gi=i%4
    xi=20.0+60.0*nxt()
    n=0.0
    for _ in range(4): n+=nxt()
    noise=n-2.0
    y[i]=10.0+eff[gi]+(0.8+sl[gi])*xi+2.0*noise
    x[i]=xi; g[i]=gi
L=np.longdouble
cols=[np.ones(ROWS)]
for j in (1,2,3): cols.append((g==j).astype(float))
cols.append(x.copy())
for j in (1,2,3): cols.append((g==j)*x)
X=np.array(cols).T.astype(L)
Y=y.astype(L)
mu=X.mean(axis=0); mu[0]=0
Xc=X-mu
A=Xc.T@Xc; b=Xc.T@Y
p=A.shape[0]
# Gaussian elimination with partial pivoting in longdouble
A=A.copy(); b=b.copy()
for k in range(p):
    piv=k+np.argmax(abs(A[k:,k])); 
    A[[k,piv]]=A[[piv,k]]; b[[k,piv]]=b[[piv,k]]
    for i in range(k+1,p):
        f=A[i,k]/A[k,k]; A[i,k:]-=f*A[k,k:]; b[i]-=f*b[k]
c=np.zeros(p,dtype=L)
for i in range(p-1,-1,-1):
    c[i]=(b[i]-(A[i,i+1:]*c[i+1:]).sum())/A[i,i]
c[0]-= (c[1:]*mu[1:]).sum()
names=["intercept","g = B","g = C","g = D","x","g = B by x","g = C by x","g = D by x"]
for nme,v in zip(names,c): print(nme, repr(float(v)), np.format_float_scientific(v, precision=20))
