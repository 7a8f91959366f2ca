from fractions import Fraction as F
# Exact stationary vector of the matrix in courtois8.txt (rational arithmetic).
P = [
 "0.85 0 0.149 0.0009 0 0.00005 0 0.00005",
 "0.1 0.65 0.249 0 0.0009 0.00005 0 0.00005",
 "0.1 0.8 0.0996 0.0003 0 0 0.0001 0",
 "0 0.0004 0 0.7 0.2995 0 0.0001 0",
 "0.0005 0 0.0004 0.399 0.6 0.0001 0 0",
 "0 0.00005 0 0 0.00005 0.6 0.2499 0.15",
 "0.00003 0 0.00003 0.00004 0 0.1 0.8 0.0999",
 "0 0.00005 0 0 0.00005 0.1999 0.25 0.55"]
P=[[F(x) for x in r.split()] for r in P]
n=8
for r in P: assert sum(r)==1
# pi (P - I) = 0, sum pi = 1: rows of system = columns
A=[[P[j][i]-(1 if i==j else 0) for j in range(n)] for i in range(n)]
A[n-1]=[F(1)]*n; b=[F(0)]*(n-1)+[F(1)]
# gaussian elimination exact
M=[A[i]+[b[i]] for i in range(n)]
for c in range(n):
    p=next(r for r in range(c,n) if M[r][c]!=0); M[c],M[p]=M[p],M[c]
    for r in range(n):
        if r!=c and M[r][c]!=0:
            f=M[r][c]/M[c][c]; M[r]=[M[r][k]-f*M[c][k] for k in range(n+1)]
pi=[M[i][n]/M[i][i] for i in range(n)]
for x in pi: print("%.17e"%float(x))
