#include "textflag.h"

// func prefetchAll(p *uintptr, n int)
// PRFM PLDL1KEEP of each address p[0..n): a hint that never faults, so an
// address outside the mapping is harmless.
TEXT ·prefetchAll(SB), NOSPLIT, $0-16
	MOVD p+0(FP), R0
	MOVD n+8(FP), R1
loop:
	CMP  $0, R1
	BLE  done
	MOVD (R0), R2
	PRFM (R2), PLDL1KEEP
	ADD  $8, R0
	SUB  $1, R1
	B    loop
done:
	RET
