package protocol

// CRC-16/CCITT-FALSE: width 16, polynomial 0x1021, initial value 0xFFFF, no
// reflection of input or output, final XOR 0. Check value of "123456789" is
// 0x29B1 (published CRC catalogue parameters). A 256-entry table makes it one
// lookup per byte; the table is computed once from the polynomial so there is
// no hand-typed constant to get wrong.

const (
	crcPoly = 0x1021
	crcInit = 0xFFFF
)

var crcTable = makeCRCTable()

func makeCRCTable() (t [256]uint16) {
	for i := range t {
		c := uint16(i) << 8
		for range 8 {
			if c&0x8000 != 0 {
				c = c<<1 ^ crcPoly
			} else {
				c <<= 1
			}
		}
		t[i] = c
	}
	return t
}

// CRC16 returns the CRC-16/CCITT-FALSE of p. It never allocates.
func CRC16(p []byte) uint16 {
	return UpdateCRC16(crcInit, p)
}

// UpdateCRC16 continues a CRC-16/CCITT-FALSE computation: CRC16(a+b) equals
// UpdateCRC16(CRC16(a), b). Start from 0xFFFF for a fresh computation.
func UpdateCRC16(crc uint16, p []byte) uint16 {
	for _, b := range p {
		crc = crc<<8 ^ crcTable[byte(crc>>8)^b]
	}
	return crc
}
