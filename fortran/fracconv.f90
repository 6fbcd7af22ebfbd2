! fracconv.f90 -- Fortran 2008 interface to libfracconv (the public C API in
! csrc/fracconv.h) through iso_c_binding.
!
! Every procedure has a required intent(out) argument status: FC_OK (0) or
! one of the FC_ERR_* codes below; fc_error_message(status) gives the
! library's message. As in C, a refused call changes nothing.
!
! Array layouts match the C ones without copying:
!   - nsig signals of n samples: x(n, nsig) (each signal contiguous);
!   - a stream block of count time steps: x(channels, count) (channel
!     fastest).
! A stream is a type(fc_stream) holding the C pointer: create it with
! fc_stream_create or fc_stream_load and release it with fc_stream_free
! (no finalizer: copies of the handle share the one C object).
module fracconv
  use, intrinsic :: iso_c_binding
  implicit none
  private

  integer, parameter, public :: FC_OK = 0, FC_ERR_NULL = 1, FC_ERR_RULE = 2, &
       FC_ERR_ORDER = 3, FC_ERR_STEP = 4, FC_ERR_SIZE = 5, FC_ERR_NONFINITE = 6, &
       FC_ERR_NOMEM = 7, FC_ERR_MODE = 8, FC_ERR_TOL = 9, FC_ERR_FORMAT = 10, &
       FC_ERR_BUSY = 11, FC_ERR_KERNEL = 12, FC_ERR_ARG = 13, FC_ERR_INDEX = 14, &
       FC_ERR_RANGE = 15, FC_ERR_HORIZON = 16, FC_ERR_IO = 17, FC_ERR_CALLBACK = 64, &
       FC_ERR_NEWTON = 65, FC_ERR_NORHS = 66
  integer, parameter, public :: FC_RULE_RECTANGLE = 0, FC_RULE_TRAPEZOID = 1, &
       FC_RULE_GRUNWALD = 2, FC_RULE_L1 = 3
  integer, parameter, public :: FC_ENGINE_AUTO = 0, FC_ENGINE_DIRECT = 1, &
       FC_ENGINE_BLOCKED = 2, FC_ENGINE_FFT = 3
  integer, parameter, public :: FC_MODE_EXACT = 0, FC_MODE_COMPRESSED = 1

  type, public :: fc_stream
    type(c_ptr) :: p = c_null_ptr
  end type fc_stream

  public :: fc_version, fc_error_message, fc_weights, fc_apply, fc_lagged_sum
  public :: fc_stream_create, fc_stream_free, fc_stream_push, fc_stream_push_block
  public :: fc_stream_history, fc_stream_count, fc_stream_save, fc_stream_load
  public :: fc_stream_save_file, fc_stream_load_file

  interface fc_apply
    module procedure fc_apply_1, fc_apply_2
  end interface fc_apply

  interface
    integer(c_int) function c_version() bind(C, name="fc_version")
      import :: c_int
    end function
    type(c_ptr) function c_strerror(st) bind(C, name="fc_strerror")
      import :: c_ptr, c_int
      integer(c_int), value :: st
    end function
    integer(c_int) function c_weights(rule, order, step, start, count, out) &
         bind(C, name="fc_weights")
      import :: c_int, c_double, c_int64_t, c_size_t
      integer(c_int), value :: rule
      real(c_double), value :: order, step
      integer(c_int64_t), value :: start
      integer(c_size_t), value :: count
      real(c_double), intent(out) :: out(*)
    end function
    integer(c_int) function c_apply(ctx, rule, order, step, x, nsig, n, engine, y) &
         bind(C, name="fc_apply")
      import :: c_int, c_double, c_size_t, c_ptr
      type(c_ptr), value :: ctx
      integer(c_int), value :: rule, engine
      real(c_double), value :: order, step
      real(c_double), intent(in) :: x(*)
      integer(c_size_t), value :: nsig, n
      real(c_double), intent(out) :: y(*)
    end function
    integer(c_int) function c_lagged_sum(ctx, x, nsig, n, kernel, klen, engine, y) &
         bind(C, name="fc_lagged_sum")
      import :: c_int, c_double, c_size_t, c_ptr
      type(c_ptr), value :: ctx
      real(c_double), intent(in) :: x(*), kernel(*)
      integer(c_size_t), value :: nsig, n, klen
      integer(c_int), value :: engine
      real(c_double), intent(out) :: y(*)
    end function
    integer(c_int) function c_stream_create(rule, order, step, channels, mode, tol, &
         horizon, out) bind(C, name="fc_stream_create")
      import :: c_int, c_double, c_size_t, c_ptr
      integer(c_int), value :: rule, mode
      real(c_double), value :: order, step, tol, horizon
      integer(c_size_t), value :: channels
      type(c_ptr), intent(out) :: out
    end function
    subroutine c_stream_free(s) bind(C, name="fc_stream_free")
      import :: c_ptr
      type(c_ptr), value :: s
    end subroutine
    integer(c_int) function c_stream_push(s, x, y) bind(C, name="fc_stream_push")
      import :: c_int, c_double, c_ptr
      type(c_ptr), value :: s
      real(c_double), intent(in) :: x(*)
      real(c_double), intent(out) :: y(*)
    end function
    integer(c_int) function c_stream_push_block(s, x, count, y) &
         bind(C, name="fc_stream_push_block")
      import :: c_int, c_double, c_ptr, c_size_t
      type(c_ptr), value :: s
      real(c_double), intent(in) :: x(*)
      integer(c_size_t), value :: count
      real(c_double), intent(out) :: y(*)
    end function
    integer(c_int) function c_stream_history(s, h) bind(C, name="fc_stream_history")
      import :: c_int, c_double, c_ptr
      type(c_ptr), value :: s
      real(c_double), intent(out) :: h(*)
    end function
    integer(c_int) function c_stream_channels(s, c) bind(C, name="fc_stream_channels")
      import :: c_int, c_ptr, c_size_t
      type(c_ptr), value :: s
      integer(c_size_t), intent(out) :: c
    end function
    integer(c_int) function c_stream_count(s, c) bind(C, name="fc_stream_count")
      import :: c_int, c_ptr, c_int64_t
      type(c_ptr), value :: s
      integer(c_int64_t), intent(out) :: c
    end function
    integer(c_int) function c_stream_save_size(s, size) bind(C, name="fc_stream_save_size")
      import :: c_int, c_ptr, c_size_t
      type(c_ptr), value :: s
      integer(c_size_t), intent(out) :: size
    end function
    integer(c_int) function c_stream_save(s, buf, size, written) bind(C, name="fc_stream_save")
      import :: c_int, c_ptr, c_size_t, c_signed_char
      type(c_ptr), value :: s
      integer(c_signed_char), intent(out) :: buf(*)
      integer(c_size_t), value :: size
      integer(c_size_t), intent(out) :: written
    end function
    integer(c_int) function c_stream_load(buf, size, out) bind(C, name="fc_stream_load")
      import :: c_int, c_ptr, c_size_t, c_signed_char
      integer(c_signed_char), intent(in) :: buf(*)
      integer(c_size_t), value :: size
      type(c_ptr), intent(out) :: out
    end function
    integer(c_int) function c_stream_save_file(s, path) bind(C, name="fc_stream_save_file")
      import :: c_int, c_ptr, c_char
      type(c_ptr), value :: s
      character(kind=c_char), intent(in) :: path(*)
    end function
    integer(c_int) function c_stream_load_file(path, max_size, out) &
        bind(C, name="fc_stream_load_file")
      import :: c_int, c_ptr, c_size_t, c_char
      character(kind=c_char), intent(in) :: path(*)
      integer(c_size_t), value :: max_size
      type(c_ptr), intent(out) :: out
    end function
    integer(c_size_t) function c_strlen(s) bind(C, name="strlen")
      import :: c_size_t, c_ptr
      type(c_ptr), value :: s
    end function
  end interface

contains

  integer function fc_version()
    fc_version = int(c_version())
  end function fc_version

  ! The library's static message for a status code.
  function fc_error_message(status) result(msg)
    integer, intent(in) :: status
    character(len=:), allocatable :: msg
    type(c_ptr) :: p
    character(kind=c_char), pointer :: chars(:)
    integer :: i, n
    p = c_strerror(int(status, c_int))
    n = int(c_strlen(p))
    call c_f_pointer(p, chars, [n])
    allocate(character(len=n) :: msg)
    do i = 1, n
      msg(i:i) = chars(i)
    end do
  end function fc_error_message

  ! Weights of a rule for the indices start .. start+size(w)-1.
  subroutine fc_weights(rule, order, step, w, status, start)
    integer, intent(in) :: rule
    real(c_double), intent(in) :: order, step
    real(c_double), intent(inout) :: w(:)
    integer, intent(out) :: status
    integer(c_int64_t), intent(in), optional :: start
    integer(c_int64_t) :: s0
    real(c_double) :: tmp(size(w))
    s0 = 0
    if (present(start)) s0 = start
    status = int(c_weights(int(rule, c_int), order, step, s0, size(w, kind=c_size_t), tmp))
    if (status == FC_OK) w = tmp
  end subroutine fc_weights

  ! One signal: y(i) approximates the operator at t = (i-1)*step.
  subroutine fc_apply_1(rule, order, step, x, y, status, engine)
    integer, intent(in) :: rule
    real(c_double), intent(in) :: order, step
    real(c_double), intent(in), contiguous :: x(:)
    real(c_double), intent(inout), contiguous :: y(:)
    integer, intent(out) :: status
    integer, intent(in), optional :: engine
    integer(c_int) :: e
    e = FC_ENGINE_AUTO
    if (present(engine)) e = int(engine, c_int)
    if (size(y) /= size(x)) then
      status = FC_ERR_ARG
      return
    end if
    status = int(c_apply(c_null_ptr, int(rule, c_int), order, step, x, 1_c_size_t, &
         size(x, kind=c_size_t), e, y))
  end subroutine fc_apply_1

  ! nsig signals as the columns of x(n, nsig).
  subroutine fc_apply_2(rule, order, step, x, y, status, engine)
    integer, intent(in) :: rule
    real(c_double), intent(in) :: order, step
    real(c_double), intent(in), contiguous :: x(:, :)
    real(c_double), intent(inout), contiguous :: y(:, :)
    integer, intent(out) :: status
    integer, intent(in), optional :: engine
    integer(c_int) :: e
    e = FC_ENGINE_AUTO
    if (present(engine)) e = int(engine, c_int)
    if (any(shape(y) /= shape(x))) then
      status = FC_ERR_ARG
      return
    end if
    status = int(c_apply(c_null_ptr, int(rule, c_int), order, step, x, &
         size(x, 2, kind=c_size_t), size(x, 1, kind=c_size_t), e, y))
  end subroutine fc_apply_2

  ! y(i) = sum_{k<=i} kernel(i-k+1) x(k).
  subroutine fc_lagged_sum(x, kernel, y, status, engine)
    real(c_double), intent(in), contiguous :: x(:), kernel(:)
    real(c_double), intent(inout), contiguous :: y(:)
    integer, intent(out) :: status
    integer, intent(in), optional :: engine
    integer(c_int) :: e
    e = FC_ENGINE_AUTO
    if (present(engine)) e = int(engine, c_int)
    if (size(y) /= size(x)) then
      status = FC_ERR_ARG
      return
    end if
    status = int(c_lagged_sum(c_null_ptr, x, 1_c_size_t, size(x, kind=c_size_t), kernel, &
         size(kernel, kind=c_size_t), e, y))
  end subroutine fc_lagged_sum

  ! A stream; mode FC_MODE_EXACT (default) or FC_MODE_COMPRESSED with tol
  ! and horizon. s is unchanged unless status == FC_OK.
  subroutine fc_stream_create(s, rule, order, step, status, channels, mode, tol, horizon)
    type(fc_stream), intent(inout) :: s
    integer, intent(in) :: rule
    real(c_double), intent(in) :: order, step
    integer, intent(out) :: status
    integer, intent(in), optional :: channels, mode
    real(c_double), intent(in), optional :: tol, horizon
    integer(c_size_t) :: c
    integer(c_int) :: m
    real(c_double) :: t, hz
    type(c_ptr) :: p
    c = 1; m = FC_MODE_EXACT; t = 0; hz = 0
    if (present(channels)) then
      if (channels < 1) then
        status = FC_ERR_SIZE
        return
      end if
      c = int(channels, c_size_t)
    end if
    if (present(mode)) m = int(mode, c_int)
    if (present(tol)) t = tol
    if (present(horizon)) hz = horizon
    status = int(c_stream_create(int(rule, c_int), order, step, c, m, t, hz, p))
    if (status == FC_OK) s%p = p
  end subroutine fc_stream_create

  subroutine fc_stream_free(s)
    type(fc_stream), intent(inout) :: s
    call c_stream_free(s%p)
    s%p = c_null_ptr
  end subroutine fc_stream_free

  integer function channels_of(s, status) result(c)
    type(fc_stream), intent(in) :: s
    integer, intent(out) :: status
    integer(c_size_t) :: cc
    cc = 0
    status = int(c_stream_channels(s%p, cc))
    c = int(cc)
  end function channels_of

  ! One time step: x(channels) in, y(channels) out.
  subroutine fc_stream_push(s, x, y, status)
    type(fc_stream), intent(in) :: s
    real(c_double), intent(in), contiguous :: x(:)
    real(c_double), intent(inout), contiguous :: y(:)
    integer, intent(out) :: status
    integer :: c
    c = channels_of(s, status)
    if (status /= FC_OK) return
    if (size(x) /= c .or. size(y) /= c) then
      status = FC_ERR_ARG
      return
    end if
    status = int(c_stream_push(s%p, x, y))
  end subroutine fc_stream_push

  ! size(x, 2) time steps of x(channels, count).
  subroutine fc_stream_push_block(s, x, y, status)
    type(fc_stream), intent(in) :: s
    real(c_double), intent(in), contiguous :: x(:, :)
    real(c_double), intent(inout), contiguous :: y(:, :)
    integer, intent(out) :: status
    integer :: c
    c = channels_of(s, status)
    if (status /= FC_OK) return
    if (size(x, 1) /= c .or. any(shape(y) /= shape(x))) then
      status = FC_ERR_ARG
      return
    end if
    status = int(c_stream_push_block(s%p, x, size(x, 2, kind=c_size_t), y))
  end subroutine fc_stream_push_block

  ! The history term of the next output, h(channels).
  subroutine fc_stream_history(s, h, status)
    type(fc_stream), intent(in) :: s
    real(c_double), intent(inout), contiguous :: h(:)
    integer, intent(out) :: status
    integer :: c
    c = channels_of(s, status)
    if (status /= FC_OK) return
    if (size(h) /= c) then
      status = FC_ERR_ARG
      return
    end if
    status = int(c_stream_history(s%p, h))
  end subroutine fc_stream_history

  ! Samples pushed per channel.
  subroutine fc_stream_count(s, count, status)
    type(fc_stream), intent(in) :: s
    integer(c_int64_t), intent(out) :: count
    integer, intent(out) :: status
    count = 0
    status = int(c_stream_count(s%p, count))
  end subroutine fc_stream_count

  ! The saved state as bytes (allocated here).
  subroutine fc_stream_save(s, blob, status)
    type(fc_stream), intent(in) :: s
    integer(c_signed_char), allocatable, intent(inout) :: blob(:)
    integer, intent(out) :: status
    integer(c_size_t) :: size, written
    integer(c_signed_char), allocatable :: buf(:)
    status = int(c_stream_save_size(s%p, size))
    if (status /= FC_OK) return
    allocate(buf(max(size, 1_c_size_t)), stat=status)
    if (status /= 0) then
      status = FC_ERR_NOMEM
      return
    end if
    status = int(c_stream_save(s%p, buf, size, written))
    if (status == FC_OK) then
      if (allocated(blob)) deallocate(blob)
      allocate(blob(written))
      blob = buf(1:written)
    end if
  end subroutine fc_stream_save

  ! A new stream from saved bytes; s is unchanged unless status == FC_OK.
  subroutine fc_stream_load(s, blob, status)
    type(fc_stream), intent(inout) :: s
    integer(c_signed_char), intent(in), contiguous :: blob(:)
    integer, intent(out) :: status
    type(c_ptr) :: p
    status = int(c_stream_load(blob, size(blob, kind=c_size_t), p))
    if (status == FC_OK) s%p = p
  end subroutine fc_stream_load

  ! The saved state written to the file path atomically (temporary file
  ! in the same directory, fsync, rename, directory sync; fracconv.h,
  ! "Checkpoint files"). Trailing blanks of path are not part of the name.
  ! FC_ERR_IO: the file could not be written; the old file is unchanged.
  subroutine fc_stream_save_file(s, path, status)
    type(fc_stream), intent(in) :: s
    character(len=*), intent(in) :: path
    integer, intent(out) :: status
    status = int(c_stream_save_file(s%p, trim(path) // c_null_char))
  end subroutine fc_stream_save_file

  ! A new stream from a file of at most max_size bytes written by
  ! fc_stream_save_file (in any language); s is unchanged unless
  ! status == FC_OK.
  subroutine fc_stream_load_file(s, path, max_size, status)
    type(fc_stream), intent(inout) :: s
    character(len=*), intent(in) :: path
    integer(c_size_t), intent(in) :: max_size
    integer, intent(out) :: status
    type(c_ptr) :: p
    status = int(c_stream_load_file(trim(path) // c_null_char, max_size, p))
    if (status == FC_OK) s%p = p
  end subroutine fc_stream_load_file

end module fracconv
