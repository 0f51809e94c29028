//go:build amd64 && !purego

#include "textflag.h"

// func decode16AVX2(src *byte, dst *float32, n int, up, ext uint64, signed bool, a, b float64)
TEXT ·decode16AVX2(SB), NOSPLIT, $0-64
	MOVQ src+0(FP), SI
	MOVQ dst+8(FP), DI
	MOVQ n+16(FP), CX
	MOVQ up+24(FP), X14
	MOVQ ext+32(FP), X13
	MOVBLZX signed+40(FP), AX
	VBROADCASTSD a+48(FP), Y12
	VBROADCASTSD b+56(FP), Y11
	TESTQ CX, CX
	JLE done
	TESTL AX, AX
	JNZ signedloop

// DECODE8 converts the eight words at SI into eight float32 at DI and
// advances both; SHIFT brings the stored bits down from bit 31,
// zero-extending (VPSRLD) or sign-extending (VPSRAD) them.
#define DECODE8(SHIFT) \
	VPMOVZXWD (SI), Y0 \ // eight words as 32-bit integers
	VPSLLD X14, Y0, Y0 \ // bit HighBit up to bit 31
	SHIFT X13, Y0, Y0 \  // the stored bits
	VCVTDQ2PD X0, Y1 \   // lower four as float64 (exact)
	VEXTRACTI128 $1, Y0, X2 \
	VCVTDQ2PD X2, Y2 \   // upper four
	VMULPD Y12, Y1, Y1 \
	VADDPD Y11, Y1, Y1 \ // v·a + b, rounded after each step
	VMULPD Y12, Y2, Y2 \
	VADDPD Y11, Y2, Y2 \
	VCVTPD2PSY Y1, X1 \  // to float32, nearest
	VCVTPD2PSY Y2, X2 \
	VMOVUPS X1, (DI) \
	VMOVUPS X2, 16(DI) \
	ADDQ $16, SI \
	ADDQ $32, DI

unsignedloop:
	DECODE8(VPSRLD)
	SUBQ $8, CX
	JGT unsignedloop
	JMP done

signedloop:
	DECODE8(VPSRAD)
	SUBQ $8, CX
	JGT signedloop

done:
	VZEROUPPER
	RET
