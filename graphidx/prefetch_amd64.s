#include "textflag.h"

// func prefetchAll(p *uintptr, n int)
// PREFETCHT0 of each address p[0..n): a hint that never faults, so an
// address outside the mapping is harmless.
TEXT ·prefetchAll(SB), NOSPLIT, $0-16
	MOVQ p+0(FP), AX
	MOVQ n+8(FP), CX
loop:
	TESTQ CX, CX
	JLE   done
	MOVQ  (AX), DX
	PREFETCHT0 (DX)
	ADDQ  $8, AX
	DECQ  CX
	JMP   loop
done:
	RET
